"""Printing the card and the referral note with WeasyPrint (CSS paged media), offline.

Templates and stylesheets live in ``printables/`` (``card.html`` with ``card.css`` plus
``card-pocket.css`` or ``card-sheet.css``; ``referral.html`` with ``referral.css``). Fonts
are the DejaVu files shipped in ``printables/fonts/``. The ``url_fetcher`` serves files
inside ``printables/`` and refuses every other URL, so printing never reaches the network.
Any warning WeasyPrint logs while rendering (a missing font, an unsupported property, a
refused URL) makes the render fail with ``PrintError``: nothing is silently left out.
"""
from __future__ import annotations

import io
import logging
import threading
from pathlib import Path
from urllib.parse import unquote, urlsplit

from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

from clinic.card.codec import qr_matrix

PRINTABLES = Path(__file__).resolve().parents[2] / "printables"
# The pocket card is 98 x 138 mm (fits an A6 pocket; four fit an A4 sheet with room for cut marks).
CARD_W_MM, CARD_H_MM = 98, 138
QR_MM = 54
_LOCK = threading.Lock()  # WeasyPrint's logger is global: one render at a time keeps warnings apart


class PrintError(RuntimeError):
    """A printable could not be made exactly as designed; the message lists why."""


def _fetcher():
    """A WeasyPrint URL fetcher serving files inside printables/ and refusing everything else."""
    import mimetypes

    from weasyprint.urls import URLFetcher, URLFetcherResponse

    class LocalFetcher(URLFetcher):
        def fetch(self, url, headers=None):
            parts = urlsplit(url)
            if parts.scheme != "file":
                raise PrintError(f"refused to fetch {url!r}: printing uses only the files shipped in printables/")
            path = Path(unquote(parts.path)).resolve()
            if PRINTABLES not in path.parents or not path.is_file():
                raise PrintError(f"refused to read {path}: not a file inside printables/")
            kind = mimetypes.guess_type(path.name)[0] or "application/octet-stream"
            if path.suffix == ".ttf":
                kind = "font/ttf"
            return URLFetcherResponse(path.as_uri(), path.read_bytes(), {"Content-Type": kind})

    return LocalFetcher(fail_on_errors=True)


class _Collect(logging.Handler):
    def __init__(self):
        super().__init__(logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record):
        self.messages.append(record.getMessage())


_env = Environment(loader=FileSystemLoader(str(PRINTABLES)), autoescape=select_autoescape(["html"]),
                   undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)


def qr_svg(text: str, size_mm: float = QR_MM) -> str:
    """The QR code as inline SVG with a 4-module quiet zone, drawn as runs of dark modules."""
    m = qr_matrix(text)
    n = len(m)
    q = 4
    parts = []
    for y, row in enumerate(m):
        x = 0
        while x < n:
            if row[x]:
                start = x
                while x < n and row[x]:
                    x += 1
                parts.append(f"M{start + q} {y + q}h{x - start}v1h-{x - start}z")
            else:
                x += 1
    total = n + 2 * q
    return (f'<svg xmlns="http://www.w3.org/2000/svg" class="qr" viewBox="0 0 {total} {total}" '
            f'style="width:{size_mm}mm;height:{size_mm}mm" shape-rendering="crispEdges" role="img" '
            f'aria-label="QR code of the card"><rect width="{total}" height="{total}" fill="#fff"/>'
            f'<path fill="#000" d="{"".join(parts)}"/></svg>')


def render_html(template: str, **context) -> str:
    return _env.get_template(template).render(**context)


def html_to_pdf(html: str, stylesheets: list[str]) -> bytes:
    """PDF bytes; PrintError when WeasyPrint warns about anything."""
    import weasyprint
    from weasyprint.urls import FatalURLFetchingError
    handler = _Collect()
    logger = logging.getLogger("weasyprint")
    fetcher = _fetcher()
    with _LOCK:
        logger.addHandler(handler)
        try:
            doc = weasyprint.HTML(string=html, base_url=PRINTABLES.as_uri() + "/", url_fetcher=fetcher)
            css = [weasyprint.CSS(filename=str(PRINTABLES / s), url_fetcher=fetcher) for s in stylesheets]
            pdf = doc.write_pdf(stylesheets=css)
        except FatalURLFetchingError as e:
            raise PrintError(f"printing tried to load something it may not: {e.__cause__ or e}") from None
        finally:
            logger.removeHandler(handler)
    if handler.messages:
        raise PrintError("printing reported problems: " + "; ".join(handler.messages))
    return pdf


def card_pdf(view: dict) -> bytes:
    """The pocket card: front and back, one card per page."""
    html = render_html("card.html", cards=[view], layout="pocket", qr=qr_svg(view["qr_text"]))
    return html_to_pdf(html, ["card.css", "card-pocket.css"])


def sheet_pdf(views: list[dict]) -> bytes:
    """Cards four to an A4 sheet with cut marks; backs on the second page, mirrored for
    long-edge duplex printing. Give one view four times for four copies."""
    if not views:
        raise PrintError("no cards to print")
    views = [dict(v, qr_svg=qr_svg(v["qr_text"])) for v in views]
    sheets = [views[i:i + 4] for i in range(0, len(views), 4)]
    html = render_html("card.html", sheets=sheets, layout="sheet")
    return html_to_pdf(html, ["card.css", "card-sheet.css"])


def referral_pdf(view: dict, referral: dict) -> bytes:
    """A referral note (A4) from the same history: reason and question up front."""
    html = render_html("referral.html", v=view, referral=referral, qr=qr_svg(view["qr_text"], 42)
                       if view.get("qr_text") else "")
    return html_to_pdf(html, ["referral.css"])


def pdf_to_png(pdf: bytes, dpi: int = 300, pages: list[int] | None = None) -> bytes:
    """PNG of a PDF's pages (stacked top to bottom with a gap) at ``dpi``."""
    import pypdfium2 as pdfium
    from PIL import Image
    doc = pdfium.PdfDocument(pdf)
    try:
        idx = pages if pages is not None else list(range(len(doc)))
        images = [doc[i].render(scale=dpi / 72).to_pil().convert("L") for i in idx]
    finally:
        doc.close()
    gap = int(dpi / 25.4 * 4)
    width = max(im.width for im in images)
    out = Image.new("L", (width, sum(im.height for im in images) + gap * (len(images) - 1)), 160)
    y = 0
    for im in images:
        out.paste(im, (0, y))
        y += im.height + gap
    buf = io.BytesIO()
    out.save(buf, format="PNG", optimize=True, dpi=(dpi, dpi))
    return buf.getvalue()


def card_png(view: dict, dpi: int = 200) -> bytes:
    """The pocket card (front above back) as a PNG for a phone."""
    return pdf_to_png(card_pdf(view), dpi=dpi)
