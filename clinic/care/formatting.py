"""Figures shown beside a threshold: never rounded onto or across it.

A MoM of 1.4999 printed with two decimals reads "1.50", the very threshold it falls short of,
and a reader beside "≥ 1.50" takes it as reached. ``format_against`` adds digits until the
printed value sits on the same side of every threshold as the value itself, and says "just
below" (or "just above") when it had to; a value equal to a threshold prints as it. The
care engine, the calculators, the card and the district report all print such figures
through here.
"""
from __future__ import annotations

from collections.abc import Iterable
from decimal import ROUND_HALF_UP, Decimal

# Equal within this is equal: the same tolerance the calculators compare thresholds with.
EPS = 1e-9
# Enough for any measured figure; a value this close to a threshold counts as on it.
MAX_DIGITS = 9


def _side(x: float, t: float) -> int:
    if abs(x - t) <= EPS:
        return 0
    return 1 if x > t else -1


def _thresholds(threshold: float | Iterable[float]) -> tuple[float, ...]:
    if isinstance(threshold, (int, float)):
        return (float(threshold),)
    return tuple(float(t) for t in threshold)


def _round(value: float | Decimal, d: int) -> float:
    """``value`` to ``d`` decimals as it will be printed: a float as ``f"{x:.{d}f}"`` rounds it,
    a Decimal (an exact quotient, e.g. a report percentage) with halves rounded up."""
    if isinstance(value, Decimal):
        return float(value.quantize(Decimal(1).scaleb(-d), rounding=ROUND_HALF_UP))
    return round(value, d)


def digits_against(value: float | Decimal, threshold: float | Iterable[float], digits: int = 2) -> int:
    """The fewest decimals (at least ``digits``) at which ``value``, rounded, is on the same
    side of every threshold as ``value`` (equal only where it is equal)."""
    ts = _thresholds(threshold)
    v = float(value)
    for d in range(digits, MAX_DIGITS + 1):
        r = _round(value, d)
        if all(_side(r, t) == _side(v, t) for t in ts):
            return d
    return MAX_DIGITS


def round_against(value: float, threshold: float | Iterable[float], digits: int = 2) -> float:
    """``value`` rounded to ``digits`` decimals, or to more where fewer would reach or cross a threshold."""
    return round(value, digits_against(value, threshold, digits))


def _text(x: float, d: int, trim: bool) -> str:
    s = f"{x:.{d}f}"
    if trim and "." in s:
        s = s.rstrip("0").rstrip(".")
    return s


def format_against(value: float, threshold: float | Iterable[float], digits: int = 2, *,
                   trim: bool = False, note: bool = True) -> str:
    """``value`` with ``digits`` decimals, or with as many more as it takes not to read as a
    threshold it has not reached (or as one it has passed): 1.4999 against 1.50 prints
    "1.4999 (just below 1.50)"; 1.50 prints "1.50". ``threshold`` is one number or several
    (e.g. the mild, moderate and severe MoM cut-offs). ``trim`` drops trailing zeros (as
    ``:g`` would); ``note=False`` leaves out the "(just below ...)" words."""
    ts = _thresholds(threshold)
    d = digits_against(value, ts, digits)
    text = _text(value, d, trim)
    if d == digits or not note:
        return text
    r = round(value, digits)
    near = min((t for t in ts if _side(r, t) != _side(value, t)), key=lambda t: abs(t - value))
    where = "just below" if value < near else "just above"
    return f"{text} ({where} {threshold_text(near, digits, trim=trim)})"


def threshold_text(t: float, digits: int = 2, *, trim: bool = False) -> str:
    """A threshold as written, with ``digits`` decimals or more if it has more (1.295 stays 1.295)."""
    d = next((d for d in range(digits, MAX_DIGITS + 1) if abs(round(t, d) - t) <= EPS), MAX_DIGITS)
    return _text(t, d, trim)
