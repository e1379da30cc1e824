"""The monthly report as PDF for the district meeting (WeasyPrint, templates in printables/).

Fonts come from printables/fonts/ through @font-face; the url_fetcher serves files of the
repository's printables/ folder and refuses everything else, so rendering never touches the
network. Charts are the inline SVG of clinic.reports.charts. No names: the follow-up list
is not part of this document.
"""
from __future__ import annotations

import mimetypes
from pathlib import Path
from urllib.parse import unquote, urlsplit

from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

from clinic.reports.coverage import (ATTRIBUTION, CAUTION, DISTRICT, INDICATORS, NULL_PERCENT,
                                     TIME_ZONE_NOTE, MonthReport)

PRINTABLES = Path(__file__).resolve().parents[2] / "printables"
TEMPLATE = "report.html"
_MIME = {".ttf": "font/ttf", ".otf": "font/otf", ".woff": "font/woff", ".woff2": "font/woff2",
         ".css": "text/css", ".svg": "image/svg+xml", ".png": "image/png"}


class RenderError(RuntimeError):
    """The PDF could not be made (a template or a file it needs is missing)."""


def _env() -> Environment:
    return Environment(loader=FileSystemLoader(str(PRINTABLES)), autoescape=select_autoescape(["html"]),
                       undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)


def sections() -> list[tuple[str, list]]:
    out: list[tuple[str, list]] = []
    for ind in INDICATORS:
        if not out or out[-1][0] != ind.section:
            out.append((ind.section, []))
        out[-1][1].append(ind)
    return out


def template_context(rep: MonthReport, trend) -> dict:
    from clinic.reports.charts import chart

    charts = {(f, i.id): chart(trend, f, i, rep.facility_name(f), for_print=True)
              for f in rep.columns for i in INDICATORS} \
        if trend else {}
    return {"rep": rep, "sections": sections(), "indicators": INDICATORS, "charts": charts,
            "caution": CAUTION, "notes": [NULL_PERCENT, ATTRIBUTION, TIME_ZONE_NOTE], "DISTRICT": DISTRICT,
            "usage": [u for u in rep.usage], "stock": rep.stock, "sensitisations": rep.sensitisations}


def report_html(rep: MonthReport, trend) -> str:
    return _env().get_template(TEMPLATE).render(**template_context(rep, trend))


def _fetcher_class():
    from weasyprint.urls import FatalURLFetchingError, URLFetcher, URLFetcherResponse

    root = PRINTABLES.resolve()

    class RepoFetcher(URLFetcher):
        """Serves files under printables/ only; anything else stops the rendering."""

        def fetch(self, url, headers=None):
            parts = urlsplit(url)
            if parts.scheme != "file":
                raise FatalURLFetchingError(f"refused to fetch {url}: printing uses repository files only")
            path = Path(unquote(parts.path)).resolve()
            if root not in path.parents or not path.is_file():
                raise FatalURLFetchingError(f"refused to fetch {url}: not a file of {root}")
            mime = _MIME.get(path.suffix.lower()) or mimetypes.guess_type(path.name)[0] or "application/octet-stream"
            return URLFetcherResponse(url, body=path.read_bytes(), headers={"Content-Type": mime})

    return RepoFetcher


def report_pdf(rep: MonthReport, trend) -> bytes:
    from weasyprint import HTML

    if not (PRINTABLES / TEMPLATE).exists():
        raise RenderError(f"{PRINTABLES / TEMPLATE} is missing; the PDF template ships with rhledger")
    html = report_html(rep, trend)
    return HTML(string=html, base_url=str(PRINTABLES) + "/", url_fetcher=_fetcher_class()()).write_pdf()
