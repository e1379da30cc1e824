"""The monthly report as PDF for the district meeting (template ``printables/report.html``).

The rendering is ``clinic.printing``: fonts come from printables/fonts/ through @font-face,
only files inside printables/ may be loaded, and any WeasyPrint warning makes the render fail
with ``PrintError``. Charts are the inline SVG of clinic.reports.charts. No names: the
follow-up list is not part of this document.
"""
from __future__ import annotations

from clinic.printing import render_pdf, render_template
from clinic.printing.fetcher import fetcher_class as _fetcher_class  # noqa: F401 - the one fetcher, tests reach it here
from clinic.reports.coverage import (
    ATTRIBUTION,
    CAUTION,
    DISTRICT,
    INDICATORS,
    NULL_PERCENT,
    TIME_ZONE_NOTE,
    MonthReport,
)

TEMPLATE = "report.html"


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
    return render_template(TEMPLATE, **template_context(rep, trend))


def report_pdf(rep: MonthReport, trend) -> bytes:
    """PDF bytes; PrintError when the template is missing, a file is refused or WeasyPrint warns."""
    return render_pdf(report_html(rep, trend), what=f"the district report for {rep.month}")
