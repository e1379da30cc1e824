"""The coverage page's opening summary: the few headline indicators for each clinic, as one
small chart (inline SVG made on the server; no script, nothing fetched, no style attribute).

The headline indicators are the four that say whether RhD-negative women got what protects
them: typed at booking, the routine dose inside its window, the event dose and the postpartum
dose within 72 hours. One row per facility and one for the district, one column per indicator;
each cell is the percentage with its numerator and denominator and a bar as long as the
percentage. A cell whose denominator is 0 shows a dash, never 0 % (coverage.NULL_PERCENT).
Colours are SVG presentation attributes, as in clinic/reports/charts.py.
"""
from __future__ import annotations

from dataclasses import dataclass
from html import escape

from clinic.reports.coverage import DISTRICT, MonthReport, indicator_by_id

# (indicator id, column heading in at most three short lines)
HEADLINE = (
    ("typed_at_booking", ("RhD typed", "at booking")),
    ("routine_on_time", ("Routine dose", "in window")),
    ("event_on_time", ("Event dose", "within 72 h")),
    ("postpartum_on_time", ("Postpartum", "dose", "within 72 h")),
)

W = 340                 # the page column on a 360 px phone
LABEL_W = 92
COL_W = (W - LABEL_W) // len(HEADLINE)
HEAD_H = 46
ROW_H = 40
INK, MUTED, LINE, BAR, BAR_BG, DISTRICT_BG = "#1b1f24", "#5b6470", "#d5dbe2", "#1d4e89", "#e3e7ec", "#e8f0fb"


@dataclass(frozen=True)
class SummaryCell:
    indicator: str
    numerator: int
    denominator: int | None
    percentage: float | None

    @property
    def text(self) -> str:
        return "–" if self.percentage is None else f"{self.percentage:.0f}%"

    @property
    def fraction(self) -> str:
        return f"{self.numerator}/{self.denominator}" if self.denominator else "none due"


@dataclass(frozen=True)
class SummaryRow:
    facility: str
    name: str
    cells: tuple[SummaryCell, ...]

    @property
    def is_district(self) -> bool:
        return self.facility == DISTRICT


def summary_rows(rep: MonthReport) -> list[SummaryRow]:
    """One row per column of the report (the facilities, then the district)."""
    rows = []
    for f in rep.columns:
        cells = []
        for ind_id, _ in HEADLINE:
            c = rep.cell(f, ind_id)
            cells.append(SummaryCell(ind_id, c.numerator, c.denominator, c.percentage))
        rows.append(SummaryRow(f, rep.facility_name(f), tuple(cells)))
    return rows


def _wrap(text: str, width: int) -> list[str]:
    """Words into lines of at most ``width`` characters (a longer word keeps its own line)."""
    lines: list[str] = []
    for word in text.split():
        if lines and len(lines[-1]) + 1 + len(word) <= width:
            lines[-1] += " " + word
        else:
            lines.append(word)
    return lines or [""]


def _text(x: float, y: float, lines, *, size: int, anchor: str = "start", fill: str = INK,
          weight: str = "normal", step: float | None = None) -> str:
    step = step or size + 2
    spans = "".join(f'<tspan x="{x:.0f}" dy="{0 if i == 0 else step:.0f}">{escape(t)}</tspan>'
                    for i, t in enumerate(lines))
    return (f'<text x="{x:.0f}" y="{y:.0f}" font-size="{size}" text-anchor="{anchor}" fill="{fill}" '
            f'font-weight="{weight}">{spans}</text>')


def summary_svg(rep: MonthReport) -> str:
    """The chart; empty text when the report has no facility yet."""
    rows = summary_rows(rep)
    if not rep.facilities:
        return ""
    height = HEAD_H + ROW_H * len(rows) + 2
    title = f"Headline coverage, {rep.month.title}, by facility"
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class="chart summary-chart" viewBox="0 0 {W} {height}" '
           f'width="100%" role="img" aria-labelledby="summary-title summary-desc" font-family="sans-serif">',
           f'<title id="summary-title">{escape(title)}</title>',
           f'<desc id="summary-desc">{escape(describe(rows))}</desc>']
    for k, (_, heading) in enumerate(HEADLINE):
        cx = LABEL_W + COL_W * k + COL_W / 2
        out.append(_text(cx, 12, heading, size=10.5, anchor="middle", fill=MUTED, step=12))
    for r, row in enumerate(rows):
        y0 = HEAD_H + ROW_H * r
        if row.is_district:
            out.append(f'<rect x="0" y="{y0}" width="{W}" height="{ROW_H}" fill="{DISTRICT_BG}"/>')
        out.append(f'<line x1="0" y1="{y0}" x2="{W}" y2="{y0}" stroke="{LINE}"/>')
        name = _wrap(row.name, 14)
        if len(name) > 3:
            name = name[:2] + [name[2] + "…"]
        first = {1: 24, 2: 17, 3: 12}[len(name)]
        out.append(_text(2, y0 + first, name, size=12 if len(name) < 3 else 11,
                         weight="bold" if row.is_district else "normal", step=13 if len(name) < 3 else 12))
        for k, cell in enumerate(row.cells):
            x0 = LABEL_W + COL_W * k + 4
            bar_w = COL_W - 8
            out.append(_text(x0 + bar_w / 2, y0 + 16, [cell.text], size=14, anchor="middle",
                             weight="bold", fill=INK if cell.percentage is not None else MUTED))
            out.append(_text(x0 + bar_w / 2, y0 + 28, [cell.fraction], size=10, anchor="middle", fill=MUTED))
            out.append(f'<rect x="{x0}" y="{y0 + 32}" width="{bar_w}" height="5" rx="2" fill="{BAR_BG}"/>')
            if cell.percentage:
                w = bar_w * min(cell.percentage, 100.0) / 100.0
                out.append(f'<rect x="{x0}" y="{y0 + 32}" width="{w:.1f}" height="5" rx="2" fill="{BAR}"/>')
    out.append(f'<line x1="0" y1="{height - 1}" x2="{W}" y2="{height - 1}" stroke="{LINE}"/>')
    out.append("</svg>")
    return "".join(out)


def describe(rows: list[SummaryRow]) -> str:
    """The chart in words (for a screen reader, and the chart's text alternative)."""
    parts = []
    for row in rows:
        cells = "; ".join(f"{indicator_by_id(c.indicator).title} {c.text} ({c.fraction})" for c in row.cells)
        parts.append(f"{row.name}: {cells}.")
    return " ".join(parts)
