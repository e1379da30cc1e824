"""Trend charts as inline SVG, made on the server (no script, nothing fetched).

One small chart per facility and indicator: twelve months, a line through the monthly
percentage (0-100 %) or count, a gap where the denominator is 0, the latest value written
beside the last point.
"""
from __future__ import annotations

from html import escape

from clinic.reports.coverage import Indicator, MonthReport
from clinic.reports.month import Month, percentage_text

W, H = 240, 78
LEFT, RIGHT, TOP, BOTTOM = 26, 44, 8, 18


def series(trend: dict[Month, MonthReport], facility: str, ind: Indicator) -> list[tuple[Month, float | None, str]]:
    """(month, plotted value or None, label) for each month of the trend, oldest first."""
    out = []
    for m in sorted(trend):
        c = trend[m].cell(facility, ind.id)
        if ind.is_count:
            out.append((m, float(c.numerator), f"{c.numerator}"))
        elif c.percentage is None:
            out.append((m, None, "no denominator"))
        else:
            out.append((m, c.percentage, f"{c.percentage_text}% ({c.numerator}/{c.denominator})"))
    return out


def trend_svg(points: list[tuple[Month, float | None, str]], *, is_count: bool, title: str,
              for_print: bool = False) -> str:
    """The chart; ``for_print`` leaves out the per-point tooltips (they cost time in the PDF)."""
    n = len(points)
    if n == 0:
        return ""
    top = max([v for _, v, _ in points if v is not None] + [1.0]) if is_count else 100.0
    pw, ph = W - LEFT - RIGHT, H - TOP - BOTTOM

    def x(i):
        return LEFT + (pw * i / (n - 1) if n > 1 else pw / 2)

    def y(v):
        return TOP + ph - ph * (v / top)

    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" class="trend" width="{W}" height="{H}" '
             f'viewBox="0 0 {W} {H}" role="img" aria-label="{escape(title)}">',
             f"<title>{escape(title)}</title>",
             f'<line x1="{LEFT}" y1="{TOP + ph}" x2="{LEFT + pw}" y2="{TOP + ph}" stroke="#888" stroke-width="0.6"/>',
             f'<line x1="{LEFT}" y1="{TOP}" x2="{LEFT + pw}" y2="{TOP}" stroke="#ddd" stroke-width="0.6"/>',
             f'<text x="{LEFT - 3}" y="{TOP + 3}" font-size="7" text-anchor="end" fill="#555">'
             f'{escape(f"{top:g}" if is_count else "100%")}</text>',
             f'<text x="{LEFT - 3}" y="{TOP + ph + 2}" font-size="7" text-anchor="end" fill="#555">0</text>',
             f'<text x="{LEFT}" y="{H - 4}" font-size="7" fill="#555">{escape(points[0][0].short)}</text>',
             f'<text x="{LEFT + pw}" y="{H - 4}" font-size="7" text-anchor="end" fill="#555">'
             f'{escape(points[-1][0].short)}</text>']
    run: list[str] = []
    runs: list[list[str]] = []
    for i, (_, v, _) in enumerate(points):
        if v is None:
            if run:
                runs.append(run)
            run = []
            continue
        run.append(f"{x(i):.1f},{y(v):.1f}")
    if run:
        runs.append(run)
    for r in runs:
        if len(r) > 1:
            parts.append(f'<polyline points="{" ".join(r)}" fill="none" stroke="#1f5f99" stroke-width="1.4"/>')
    for i, (m, v, label) in enumerate(points):
        tip = "" if for_print else f"<title>{escape(m.title)}: {escape(label)}</title>"
        if v is None:
            parts.append(f'<text x="{x(i):.1f}" y="{TOP + ph - 2}" font-size="6" text-anchor="middle" '
                         f'fill="#999">–{tip}</text>')
            continue
        parts.append(f'<circle cx="{x(i):.1f}" cy="{y(v):.1f}" r="1.8" fill="#1f5f99">{tip}</circle>')
    last = points[-1]
    text = "–" if last[1] is None else (f"{last[1]:g}" if is_count else f"{percentage_text(last[1])}%")
    ly = y(last[1]) if last[1] is not None else TOP + ph
    parts.append(f'<text x="{LEFT + pw + 4}" y="{ly + 3:.1f}" font-size="8" fill="#222">{escape(text)}</text>')
    parts.append("</svg>")
    return "".join(parts)


def chart(trend: dict[Month, MonthReport], facility: str, ind: Indicator, facility_name: str = "",
          for_print: bool = False) -> str:
    title = f"{ind.title}, {facility_name or facility}, 12-month trend"
    return trend_svg(series(trend, facility, ind), is_count=ind.is_count, title=title, for_print=for_print)
