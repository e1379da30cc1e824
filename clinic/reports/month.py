"""A calendar month in the district's local time zone, and percentages as reported."""
from __future__ import annotations

import re
from dataclasses import dataclass
from datetime import date, datetime, timezone, tzinfo
from decimal import ROUND_HALF_UP, Decimal
from functools import lru_cache

from clinic.care.formatting import digits_against, format_against

_MONTH = re.compile(r"^(\d{4})-(\d{2})$")
MONTH_NAMES = ("January", "February", "March", "April", "May", "June", "July", "August",
               "September", "October", "November", "December")


class MonthFormatError(ValueError):
    """A month that is not written YYYY-MM."""


@dataclass(frozen=True, order=True)
class Month:
    """A calendar month; its boundaries are midnight local time in ``tz``."""

    year: int
    month: int

    @classmethod
    def parse(cls, text: str) -> "Month":
        m = _MONTH.match(str(text).strip())
        if not m or not 1 <= int(m.group(2)) <= 12 or int(m.group(1)) < 1900:
            raise MonthFormatError(f"{text!r} is not a month; write it YYYY-MM, e.g. 2026-11")
        return cls(int(m.group(1)), int(m.group(2)))

    @classmethod
    def of(cls, dt: datetime, tz: tzinfo) -> "Month":
        loc = dt.astimezone(tz)
        return cls(loc.year, loc.month)

    def __str__(self) -> str:
        return f"{self.year:04d}-{self.month:02d}"

    @property
    def title(self) -> str:
        return f"{MONTH_NAMES[self.month - 1]} {self.year}"

    @property
    def short(self) -> str:
        return f"{MONTH_NAMES[self.month - 1][:3]} {self.year % 100:02d}"

    def shift(self, n: int) -> "Month":
        k = self.year * 12 + (self.month - 1) + n
        return Month(k // 12, k % 12 + 1)

    def trend(self, n: int = 12) -> list["Month"]:
        """The ``n`` months ending with this one, oldest first."""
        return [self.shift(i) for i in range(-(n - 1), 1)]

    @property
    def first_day(self) -> date:
        return date(self.year, self.month, 1)

    @property
    def last_day(self) -> date:
        nxt = self.shift(1).first_day
        return date.fromordinal(nxt.toordinal() - 1)

    def start(self, tz: tzinfo) -> datetime:
        """First instant of the month, local midnight, as aware UTC."""
        return _start(self.year, self.month, tz)

    def end(self, tz: tzinfo) -> datetime:
        """First instant of the next month (exclusive end), aware UTC."""
        return self.shift(1).start(tz)

    def contains(self, dt: datetime | None, tz: tzinfo) -> bool:
        if dt is None:
            return False
        return self.start(tz) <= dt < self.end(tz)

    def contains_date(self, d: str | date | None) -> bool:
        if d is None:
            return False
        if isinstance(d, str):
            d = date.fromisoformat(d[:10])
        return (d.year, d.month) == (self.year, self.month)


@lru_cache(maxsize=4096)
def _start(year: int, month: int, tz: tzinfo) -> datetime:
    return datetime(year, month, 1, tzinfo=tz).astimezone(timezone.utc)


def percentage(numerator: int, denominator: int | None) -> float | None:
    """numerator / denominator x 100, one decimal, halves rounded up; None when the
    denominator is 0 or absent (nothing to measure is not 0 %). Never 100.0 when not all, nor
    0.0 when some: then as many more decimals as it takes (1999 of 2000 is 99.95, not 100.0)."""
    if not denominator:
        return None
    q = Decimal(numerator) * 100 / Decimal(denominator)
    d = digits_against(q, (0, 100), 1)
    return float(q.quantize(Decimal(1).scaleb(-d), rounding=ROUND_HALF_UP))


def percentage_text(p: float | None) -> str:
    """A reported percentage as printed (without the % sign): "33.3", "99.95", "100.0"."""
    return "" if p is None else format_against(p, (0, 100), 1, note=False)
