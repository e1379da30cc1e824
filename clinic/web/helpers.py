"""Small helpers shared by the pages: local time, GA text, form input to raw fields.

The template filters and globals are registered by ``init_app``; the stock figures the forms
show are ``clinic.web.stock`` (registered by its own ``init_app``).
"""
from __future__ import annotations

from datetime import date, datetime, timezone

from flask import Flask

from clinic.care.codes import PATHWAY_WORDS, completed_by
from clinic.care.codes import gives_anti_d as codes_gives_anti_d
from clinic.records.choices import plain_words
from clinic.records.schema import KINDS
from clinic.records.values import format_ga
from clinic.web.clock import clock_warnings, note_client_time, now_local, today_local
from clinic.web.db import get_settings, utcnow


def as_dt(value) -> datetime | None:
    """A stored UTC text or an aware datetime -> aware datetime (None stays None)."""
    if value is None or value == "":
        return None
    if isinstance(value, datetime):
        return value if value.tzinfo else value.replace(tzinfo=timezone.utc)
    if isinstance(value, date):
        return datetime(value.year, value.month, value.day, tzinfo=timezone.utc)
    return datetime.fromisoformat(str(value).replace("Z", "+00:00"))


def local(value, fmt: str = "%a %d %b %Y %H:%M") -> str:
    """A UTC value shown in the facility's local time."""
    dt = as_dt(value)
    if dt is None:
        return ""
    return dt.astimezone(get_settings().tz).strftime(fmt)


def local_input(value) -> str:
    """A UTC value as the value of a datetime-local input (facility's wall clock)."""
    dt = as_dt(value)
    return "" if dt is None else dt.astimezone(get_settings().tz).strftime("%Y-%m-%dT%H:%M")


def ga_text(days) -> str:
    return "" if days is None or days == "" else format_ga(int(days))


def countdown(value) -> str:
    """'in 1 d 4 h' / '3 h 10 min ago' relative to now."""
    dt = as_dt(value)
    if dt is None:
        return ""
    secs = int((dt - utcnow()).total_seconds())
    past = secs < 0
    secs = abs(secs)
    d, rem = divmod(secs, 86400)
    h, rem = divmod(rem, 3600)
    m = rem // 60
    if d >= 2:
        text = f"{d} d" + (f" {h} h" if d < 7 and h else "")
    elif d == 1:
        text = f"1 d {h} h"
    elif h:
        text = f"{h} h {m} min"
    else:
        text = f"{m} min"
    return f"{text} ago" if past else f"in {text}"


def deadline_text(value, short: bool = False) -> str:
    """'before 14:30 today' / 'before 14:30 tomorrow' / 'before 14:30 Thu 3 Dec', local time.
    ``short``: the weekday alone within the coming week ('before 14:30 Thu'), for one line."""
    dt = as_dt(value)
    if dt is None:
        return ""
    loc = dt.astimezone(get_settings().tz)
    today = now_local().date()
    days = (loc.date() - today).days
    day = {0: "today", 1: "tomorrow", -1: "yesterday"}.get(days, loc.strftime("%a %d %b"))
    if short and 1 < days < 7:
        day = loc.strftime("%a")
    return f"before {loc.strftime('%H:%M')} {day}"


def deadline_short(value) -> str:
    return deadline_text(value, short=True)


def form_raw(kind: str, form, *, partial: bool = False, only=None) -> dict:
    """Raw fields of ``kind`` from a submitted form (MultiDict).

    On create an empty input means "not recorded" and is left out; on an amendment
    (``partial``) an empty input that was shown means "clear it", so it is passed on.
    Multi-choice fields come from several checkboxes of one name; a bool checkbox may be
    preceded by a hidden "no" input of the same name (the last value wins).
    """
    spec = KINDS[kind]
    raw: dict = {}
    for f in spec.fields:
        if only is not None and f.name not in only:
            continue
        if f.name not in form:
            continue
        if f.type == "choices":
            vals = [v for v in form.getlist(f.name) if v.strip()]
            if vals or partial:
                raw[f.name] = vals
            continue
        vals = form.getlist(f.name)
        v = vals[-1] if vals else ""
        if v.strip() == "" and not partial:
            continue
        raw[f.name] = v
    return raw


def dict_without(d: dict, *keys) -> dict:
    return {k: v for k, v in (d or {}).items() if k not in keys}


def field_of(obj, key, default=None):
    """``key`` of a plan part given as a dict (``to_dict()``) or as the care engine's object."""
    return obj.get(key, default) if isinstance(obj, dict) else getattr(obj, key, default)


def entry_kind_for(item) -> str | None:
    """The record kind whose entry completes this plan item (codes.COMPLETED_BY): "dose" for a
    proposed anti-D dose; an anti-D item with no dose proposed (not needed) has no entry to make."""
    if field_of(item, "dose_iu"):
        return "dose"
    kind = completed_by(field_of(item, "code") or "")
    return None if kind == "dose" else kind


def gives_anti_d(item) -> bool:
    """Is the item an anti-D dose (its action reads "Give anti-D"), not a test or a typing?"""
    return bool(field_of(item, "dose_iu")) or codes_gives_anti_d(field_of(item, "code") or "")


def init_app(app: Flask) -> None:
    app.add_template_filter(dict_without, "dict_without")
    app.add_template_filter(local, "local")
    app.add_template_filter(local_input, "local_input")
    app.add_template_filter(ga_text, "ga")
    app.add_template_filter(countdown, "countdown")
    app.add_template_filter(deadline_text, "deadline")
    app.add_template_filter(deadline_short, "deadline_short")
    app.add_template_global(today_local, "today_local")
    app.add_template_global(now_local, "now_local")
    app.add_template_global(clock_warnings, "clock_warnings")
    app.before_request(note_client_time)
    app.add_template_global(KINDS, "KINDS")
    app.add_template_global(entry_kind_for, "entry_kind_for")
    app.add_template_global(gives_anti_d, "gives_anti_d")
    app.add_template_global(PATHWAY_WORDS, "PATHWAY_WORDS")
    app.add_template_filter(plain_words, "choice_words")
