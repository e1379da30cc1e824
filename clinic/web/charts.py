"""Charts drawn on the server as SVG (inline in the page, printable, no chart library).

* ``titre_chart``: antibody titre over gestational age, log2 scale (doubling dilutions).
* ``mca_chart``: MCA-PSV over gestational age with the median and the profile's MoM curves. The
  median comes from the care engine (``median_fn``); the formula is never repeated here.
"""
from __future__ import annotations

import math
from typing import Callable, Iterable

from markupsafe import Markup, escape

from clinic.care.formatting import format_against
from clinic.records.values import format_ga

W, H = 360, 240
LEFT, RIGHT, TOP, BOTTOM = 50, 14, 14, 34
# Presentation attributes in the SVG itself, so it draws the same on screen, printed, and in PDFs.
INK, MUTED, GRID, BRAND = "#1b1f24", "#5b6470", "#e3e7ec", "#1d4e89"
CURVE_STYLE = {"mom-median": 'stroke="#6c757d" stroke-dasharray="4 3"', "mom-mild": 'stroke="#8a5a00"',
               "mom-severe": 'stroke="#a4161a"'}


def mom_lines(profile) -> tuple[tuple[float, str, str], ...]:
    """The MCA chart's MoM curves: the median, and the profile's mild and referral thresholds."""
    s = profile.get("surveillance")
    mild, refer = s["mca_mom_mild"], s["mca_refer_mom"]
    return ((1.0, "1.0 MoM", "mom-median"), (mild, f"{mild:g}", "mom-mild"), (refer, f"{refer:g}", "mom-severe"))


def _x(ga_days: float, lo: float, hi: float) -> float:
    return LEFT + (ga_days - lo) / (hi - lo) * (W - LEFT - RIGHT)


def _y(v: float, lo: float, hi: float) -> float:
    return H - BOTTOM - (v - lo) / (hi - lo) * (H - TOP - BOTTOM)


def _ga_range(points, floor_w: int, ceil_w: int) -> tuple[int, int]:
    weeks = [p[0] / 7 for p in points]
    lo = max(floor_w, int(math.floor(min(weeks))) - 2)
    hi = min(ceil_w, int(math.ceil(max(weeks))) + 2)
    if hi - lo < 6:
        hi = min(ceil_w, lo + 6)
        lo = max(floor_w, hi - 6)
    return lo * 7, hi * 7


def _frame(title: str, x_lo: int, x_hi: int, y_ticks: Iterable[tuple[float, str]],
           y_lo: float, y_hi: float) -> list[str]:
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class="chart" viewBox="0 0 {W} {H}" '
           f'width="100%" role="img" aria-label="{escape(title)}" font-family="sans-serif" font-size="10">'
           f'<title>{escape(title)}</title>',
           f'<rect class="plot" x="{LEFT}" y="{TOP}" width="{W - LEFT - RIGHT}" height="{H - TOP - BOTTOM}" '
           f'fill="#fbfcfd" stroke="#d5dbe2"/>']
    step = 2 if (x_hi - x_lo) / 7 <= 16 else 4
    for wk in range(x_lo // 7, x_hi // 7 + 1):
        if wk % step:
            continue
        x = _x(wk * 7, x_lo, x_hi)
        out.append(f'<line class="grid" x1="{x:.1f}" y1="{TOP}" x2="{x:.1f}" y2="{H - BOTTOM}" stroke="{GRID}"/>')
        out.append(
            f'<text class="tick" x="{x:.1f}" y="{H - BOTTOM + 14}" text-anchor="middle" fill="{MUTED}">{wk}</text>'
        )
    out.append(
        f'<text class="axis" x="{(LEFT + W - RIGHT) / 2:.0f}" y="{H - 4}" text-anchor="middle" '
        f'fill="{MUTED}">gestational age (weeks)</text>'
    )
    for v, label in y_ticks:
        y = _y(v, y_lo, y_hi)
        out.append(f'<line class="grid" x1="{LEFT}" y1="{y:.1f}" x2="{W - RIGHT}" y2="{y:.1f}" stroke="{GRID}"/>')
        out.append(
            f'<text class="tick" x="{LEFT - 4}" y="{y + 4:.1f}" text-anchor="end" fill="{MUTED}">{escape(label)}</text>'
        )
    return out


def _series(coords: list[tuple[float, float]]) -> str:
    pts = " ".join(f"{x:.1f},{y:.1f}" for x, y in coords)
    return f'<polyline class="series" fill="none" stroke="{BRAND}" stroke-width="2" points="{pts}"/>'


def titre_chart(points: list[tuple[int, int, str]]) -> Markup | None:
    """points: (ga_days, titre N of 1:N, antibody). None when there is nothing to draw."""
    points = sorted(p for p in points if p[0] is not None and p[1])
    if not points:
        return None
    x_lo, x_hi = _ga_range(points, 4, 44)
    top = max(4, math.ceil(math.log2(max(p[1] for p in points))) + 1)
    ticks = [(k, f"1:{2**k}") for k in range(0, top + 1) if top <= 8 or k % 2 == 0]
    out = _frame("Antibody titre by gestational age", x_lo, x_hi, ticks, 0, top)
    for ab in sorted({p[2] for p in points}):
        series = [p for p in points if p[2] == ab]
        coords = [(_x(g, x_lo, x_hi), _y(math.log2(t), 0, top)) for g, t, _ in series]
        if len(coords) > 1:
            out.append(
                f'<polyline class="series" fill="none" stroke="{BRAND}" stroke-width="2" points="'
                + " ".join(f"{x:.1f},{y:.1f}" for x, y in coords)
                + '"/>'
            )
        for (x, y), (g, t, _) in zip(coords, series, strict=True):
            out.append(
                f'<circle class="point" cx="{x:.1f}" cy="{y:.1f}" r="4" fill="{BRAND}"><title>{escape(ab)} 1:{t} at '
                f"{format_ga(g)}</title></circle>"
            )
        lx, ly = coords[-1]
        out.append(
            f'<text class="label" x="{min(lx + 6, W - RIGHT - 40):.1f}" y="{max(ly - 6, TOP + 10):.1f}" '
            f'fill="{INK}">{escape(ab)}</text>'
        )
    out.append("</svg>")
    return Markup("".join(out))


def mca_chart(
    points: list[tuple[int, float]],
    median_fn: Callable[[int], float],
    lines: Iterable[tuple[float, str, str]],
    valid: tuple[int, int] = (18 * 7, 40 * 7),
) -> Markup | None:
    """points: (ga_days, MCA-PSV cm/s). median_fn(ga_days) -> median cm/s (from clinic.care);
    lines: the MoM curves (``mom_lines(profile)``), drawn over ``valid`` (the reference range of the median)."""
    lines = tuple(lines)
    points = sorted(p for p in points if p[0] is not None and p[1] is not None)
    if not points:
        return None
    x_lo, x_hi = _ga_range(points, 14, 42)
    c_lo, c_hi = max(x_lo, valid[0]), min(x_hi, valid[1])
    curve_days = list(range(c_lo, c_hi + 1, 2)) if c_hi > c_lo else []
    medians = {d: median_fn(d) for d in curve_days}
    y_max = max([p[1] for p in points] + [max(mom for mom, _, _ in lines) * m for m in medians.values()] + [40])
    y_hi = int(math.ceil(y_max / 10.0) * 10) + 10
    ticks = [(v, str(v)) for v in range(0, y_hi + 1, 10 if y_hi <= 80 else 20)]
    out = _frame("MCA peak systolic velocity by gestational age", x_lo, x_hi, ticks, 0, y_hi)
    out.append(
        f'<text class="axis" x="12" y="{TOP + 6}" transform="rotate(-90 12 {TOP + 6})" text-anchor="end" '
        f'fill="{MUTED}">cm/s</text>'
    )
    for mom, label, cls in lines:
        if not curve_days:
            break
        pts = " ".join(f"{_x(d, x_lo, x_hi):.1f},{_y(mom * medians[d], 0, y_hi):.1f}" for d in curve_days)
        out.append(f'<polyline class="curve {cls}" fill="none" stroke-width="1.5" {CURVE_STYLE[cls]} points="{pts}"/>')
        d = curve_days[-1]
        out.append(
            f'<text class="label {cls}" x="{_x(d, x_lo, x_hi) - 2:.1f}" '
            f'y="{_y(mom * medians[d], 0, y_hi) - 4:.1f}" text-anchor="end" fill="{MUTED}">{label}</text>'
        )
    coords = [(_x(g, x_lo, x_hi), _y(v, 0, y_hi)) for g, v in points]
    if len(coords) > 1:
        out.append(_series(coords))
    cuts = [mom for mom, _, _ in lines]
    for (x, y), (g, v) in zip(coords, points, strict=True):
        mom_txt = ""
        if valid[0] <= g <= valid[1]:
            # beside the drawn MoM curves: never rounded onto one it has not reached
            mom_txt = f" ({format_against(v / median_fn(g), cuts)} MoM)"
        out.append(f'<circle class="point" cx="{x:.1f}" cy="{y:.1f}" r="4" fill="{BRAND}"><title>{v:g} cm/s at '
                   f'{format_ga(g)}{mom_txt}</title></circle>')
    out.append("</svg>")
    return Markup("".join(out))
