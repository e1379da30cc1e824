"""Errors the care engine raises. Each names the field and the allowed range."""
from __future__ import annotations


class CareError(ValueError):
    """A care-engine input or profile that cannot be used."""


class ProfileError(CareError):
    """A protocol profile (or a facility override of it) that is missing, unknown or out of range."""


class CareInputError(CareError):
    """A calculator input outside its allowed range; ``errors`` maps field to message."""

    def __init__(self, field: str, message: str):
        self.field = field
        self.errors = {field: message}
        super().__init__(f"{field}: {message}")


def require_range(field: str, value, lo=None, hi=None, *, lo_open=False, hi_open=False, unit=""):
    """Return ``value`` as a float, or raise CareInputError naming the field and the range."""
    if isinstance(value, bool) or value is None:
        raise CareInputError(field, f"must be a number{_rng(lo, hi, lo_open, hi_open, unit)}")
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise CareInputError(field, f"{value!r} is not a number{_rng(lo, hi, lo_open, hi_open, unit)}") from None
    if x != x or x in (float("inf"), float("-inf")):
        raise CareInputError(field, f"must be a finite number{_rng(lo, hi, lo_open, hi_open, unit)}")
    bad = False
    if lo is not None and (x < lo or (lo_open and x == lo)):
        bad = True
    if hi is not None and (x > hi or (hi_open and x == hi)):
        bad = True
    if bad:
        raise CareInputError(field, f"{x:g} is outside the allowed range{_rng(lo, hi, lo_open, hi_open, unit)}")
    return x


def _rng(lo, hi, lo_open, hi_open, unit):
    u = f" {unit}" if unit else ""
    if lo is None and hi is None:
        return ""
    if hi is None:
        return f" ({'above' if lo_open else 'at least'} {lo:g}{u})"
    if lo is None:
        return f" ({'below' if hi_open else 'at most'} {hi:g}{u})"
    left = "above " if lo_open else ""
    right = " (exclusive)" if hi_open else ""
    return f" ({left}{lo:g} to {hi:g}{u}{right})"
