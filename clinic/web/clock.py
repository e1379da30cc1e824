"""The facility's wall clock: now and today in its time zone.

Both follow ``db.utcnow`` (which tests may pin), so a page, a form default and the stock
ledger agree on what "today" is.
"""
from __future__ import annotations

from datetime import datetime

from clinic.web.db import get_settings, utcnow


def now_local() -> datetime:
    return utcnow().astimezone(get_settings().tz)


def today_local() -> str:
    return now_local().date().isoformat()
