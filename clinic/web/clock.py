"""The facility's wall clock: now and today in its time zone, and whether it can be trusted.

Both follow ``db.utcnow`` (which tests may pin), so a page, a form default and the stock
ledger agree on what "today" is.

A clock that runs behind is dangerous: a dose given minutes ago would look as if it were still
to come. ``clock_warnings`` (shown on every page by base.html) says so when the clock is behind
the latest change recorded in the store (it was set back, or a battery failed) or behind the
clock of a phone that sent a request (header ``X-Client-Time``, sent by the outbox).
"""
from __future__ import annotations

from datetime import datetime, timedelta, timezone

from flask import current_app, g, request

from clinic.web.db import get_settings, get_store, utcnow

# Clocks of phones and laptops differ by minutes; more than this is a wrong clock.
TOLERANCE = timedelta(minutes=10)
# How long one phone's report of a clock difference is shown.
CLIENT_REPORT_FOR = timedelta(hours=1)
CLIENT_HEADER = "X-Client-Time"


def now_local() -> datetime:
    return utcnow().astimezone(get_settings().tz)


def today_local() -> str:
    return now_local().date().isoformat()


def _text(dt: datetime) -> str:
    return dt.astimezone(get_settings().tz).strftime("%a %d %b %Y %H:%M")


def _span(delta: timedelta) -> str:
    minutes = int(delta.total_seconds() // 60)
    days, rest = divmod(minutes, 24 * 60)
    hours, mins = divmod(rest, 60)
    parts = [f"{days} d" if days else "", f"{hours} h" if hours else "", f"{mins} min" if mins and not days else ""]
    return " ".join(p for p in parts if p) or "a few minutes"


def note_client_time() -> None:
    """Before each request: remember how far a phone's clock (its ``X-Client-Time``) is ahead."""
    raw = request.headers.get(CLIENT_HEADER)
    if not raw:
        return
    try:
        client = datetime.fromisoformat(raw.strip().replace("Z", "+00:00"))
    except ValueError:
        return
    if client.tzinfo is None:
        return
    server = utcnow()
    current_app.extensions["rhledger"]["client_clock"] = (client - server, server)


def clock_warnings() -> list[str]:
    """What is wrong with this computer's clock, in plain words (empty when nothing is)."""
    if "clock_warnings" in g:
        return g.clock_warnings
    out = []
    now = utcnow()
    latest = get_store().latest_change()
    if latest:
        at = datetime.fromisoformat(latest.replace("Z", "+00:00")).astimezone(timezone.utc)
        if at > now + TOLERANCE:
            out.append(f"This computer's clock says {_text(now)}, but a change was recorded at {_text(at)}: "
                       f"the clock is {_span(at - now)} behind (or was ahead then). Set the date and time "
                       f"right before recording or giving anything: entries made since are kept and counted, "
                       f"but times and deadlines shown may be wrong.")
    seen = current_app.extensions["rhledger"].get("client_clock")
    if seen is not None:
        ahead, when = seen
        if ahead > TOLERANCE and now - when < CLIENT_REPORT_FOR:
            out.append(f"A phone's clock was {_span(ahead)} ahead of this computer's at {_text(when)}: one of "
                       f"the two clocks is wrong. Check the date and time on both before recording doses.")
    g.clock_warnings = out
    return out
