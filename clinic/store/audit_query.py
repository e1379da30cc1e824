"""The audit trail filtered by person, record and date (the admin page and `rhledger audit`).

Dates are local calendar days at the facility (``since`` and ``until`` both inclusive); the
audit lines carry UTC text, so the days are turned into UTC bounds first.
"""
from __future__ import annotations

from dataclasses import dataclass
from datetime import date, datetime, time, timedelta, timezone, tzinfo


class AuditQueryError(ValueError):
    """A filter value that is not usable (a date that is not YYYY-MM-DD, since after until)."""


@dataclass(frozen=True)
class AuditQuery:
    by: str = ""
    record: str = ""
    since: date | None = None
    until: date | None = None
    limit: int = 500

    @classmethod
    def parse(cls, *, by: str = "", record: str = "", since: str = "", until: str = "", limit: int = 500):
        def day(name, text):
            text = (text or "").strip()
            if not text:
                return None
            try:
                return date.fromisoformat(text)
            except ValueError:
                raise AuditQueryError(f"{name}: {text!r} is not a date (YYYY-MM-DD)") from None

        q = cls((by or "").strip(), (record or "").strip(), day("since", since), day("until", until),
                max(1, min(int(limit), 10000)))
        if q.since and q.until and q.since > q.until:
            raise AuditQueryError("since: the first day is after the last day (until)")
        return q


def _utc_bound(d: date, tz: tzinfo) -> str:
    return datetime.combine(d, time(0), tz).astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def run(store, q: AuditQuery, tz: tzinfo) -> tuple[list[dict], bool]:
    """(audit lines newest first, whether more matched than ``q.limit``)."""
    since = _utc_bound(q.since, tz) if q.since else None
    before = _utc_bound(q.until + timedelta(days=1), tz) if q.until else None
    out = []
    for e in store.audit(record_id=q.record or None, since=since):
        if before and str(e.get("at", "")) >= before:
            continue
        if q.by and e.get("by") != q.by:
            continue
        out.append(e)
    out.reverse()
    return out[:q.limit], len(out) > q.limit


def filter_events(events: list[dict], q: AuditQuery, tz: tzinfo) -> list[dict]:
    """Account events (users-log.jsonl) by the same person and date filters, newest first."""
    since = _utc_bound(q.since, tz) if q.since else None
    before = _utc_bound(q.until + timedelta(days=1), tz) if q.until else None
    out = [e for e in events
           if (not q.by or q.by in (e.get("by"), e.get("user")))
           and (not since or str(e.get("at", "")) >= since)
           and (not before or str(e.get("at", "")) < before)]
    out.reverse()
    return out[:q.limit]
