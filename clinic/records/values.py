"""Values every layer writes the same way: gestational age as whole days written weeks+days
("30+2"), and datetimes stored as UTC text ("2026-05-01T08:30:00Z").

The lowest module of the project: records, the care engine and everything above read and
write these through here, so it imports nothing of ours.
"""
from __future__ import annotations

import re
from datetime import datetime, timezone

_WEEKS_DAYS = re.compile(r"^\s*(\d{1,2})\s*(?:\+|w\s*)(\d)\s*d?\s*$", re.IGNORECASE)
_WEEKS_ONLY = re.compile(r"^\s*(\d{1,2})\s*w?\s*$", re.IGNORECASE)
_DECIMAL = re.compile(r"^\s*(\d{1,2}\.\d+)\s*$")


class GAFormatError(ValueError):
    """A gestational age that is not weeks+days or decimal weeks."""


def parse_ga(text: str | int | float) -> int:
    """Return gestational age in days from "30+2", "30w2d", "30" or decimal weeks "30.5".

    Decimal weeks are rounded to the nearest whole day (30.5 weeks = 213.5 -> 214 days).
    An int is taken as days already.
    """
    if isinstance(text, bool):
        raise GAFormatError("gestational age must be weeks+days such as 30+2")
    if isinstance(text, int):
        return text
    if isinstance(text, float):
        return int(round(text * 7))
    s = str(text)
    m = _WEEKS_DAYS.match(s)
    if m:
        weeks, days = int(m.group(1)), int(m.group(2))
        if days > 6:
            raise GAFormatError(f"days part of {s!r} must be 0-6")
        return weeks * 7 + days
    m = _WEEKS_ONLY.match(s)
    if m:
        return int(m.group(1)) * 7
    m = _DECIMAL.match(s)
    if m:
        return int(round(float(m.group(1)) * 7))
    raise GAFormatError(f"{s!r} is not a gestational age; write weeks+days such as 30+2, or decimal weeks such as 30.3")


def format_ga(days: int) -> str:
    """212 -> "30+2"."""
    if days < 0:
        return f"-{format_ga(-days)}"
    return f"{days // 7}+{days % 7}"


def ga_weeks(days: int | float) -> float:
    """Days to decimal weeks."""
    return days / 7.0


def utc_text(dt: datetime) -> str:
    """A timezone-aware datetime as stored: UTC, seconds, trailing Z."""
    return dt.astimezone(timezone.utc).replace(microsecond=0).strftime("%Y-%m-%dT%H:%M:%SZ")


def parse_utc(text: str) -> datetime:
    """A stored datetime string back to an aware UTC datetime."""
    return datetime.fromisoformat(text.replace("Z", "+00:00")).astimezone(timezone.utc)
