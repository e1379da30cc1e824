"""Indicators of routine antenatal prophylaxis and of anti-D after sensitising events."""
from __future__ import annotations

from collections.abc import Iterator
from datetime import datetime, timezone, tzinfo
from typing import Any

from clinic.care.codes import Category, ItemCode, parse_item_code
from clinic.records.values import parse_utc
from clinic.reports.indicators.registry import S_EVENT, S_ROUTINE, Hit, closed_in, indicator
from clinic.reports.month import Month
from clinic.reports.pregnancy_case import OPEN_FOLLOW_UP, Case, ReportError, as_dt, attr, done, eligible, outcome_of


def _routine_hits(case: Case, month: Month, tz: tzinfo) -> Iterator[Any]:
    for it in case.items_of(Category.ROUTINE):
        if eligible(it) and closed_in(month, as_dt(attr(it, "closes")), tz):
            yield it


_ROUTINE_DEN = "eligible routine doses whose window closed in the month"
_ROUTINE_DEF = ("Routine doses the care engine plans for the woman (not 'not needed') whose window "
                "closed in the month (the item's 'closes'; a window ending with the last day of the "
                "month closed in that month); a two-dose profile counts each dose in the month its "
                "own window closes. ")


@indicator("routine_on_time", S_ROUTINE, "Routine dose given inside the window",
           _ROUTINE_DEF + "Numerator: the engine judges the dose given on time.",
           "given inside the window", _ROUTINE_DEN)
def _routine_on_time(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    for it in _routine_hits(case, month, tz):
        o = outcome_of(it)
        yield Hit(case, o == "on-time", o, None, attr(it, "code"), as_dt(attr(it, "closes")))


@indicator("routine_late", S_ROUTINE, "Routine dose given late",
           _ROUTINE_DEF + "Numerator: the engine judges the dose given, but late.",
           "given late", _ROUTINE_DEN)
def _routine_late(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    for it in _routine_hits(case, month, tz):
        o = outcome_of(it)
        yield Hit(case, o == "late", o, None, attr(it, "code"), as_dt(attr(it, "closes")))


@indicator("routine_not_given", S_ROUTINE, "Routine dose not given",
           _ROUTINE_DEF + "Numerator: no dose recorded for the item (follow-up list); a dose whose "
           "deadline had not passed when the report was made is listed for follow-up but not counted.",
           "not given", _ROUTINE_DEN)
def _routine_missed(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    for it in _routine_hits(case, month, tz):
        o = outcome_of(it)
        miss = o == "not-given"
        follow = (f"{attr(it, 'title') or attr(it, 'code')} not given" if miss
                  else f"{attr(it, 'title') or attr(it, 'code')}: {OPEN_FOLLOW_UP}" if o == "open" else None)
        yield Hit(case, miss, o, follow,
                  attr(it, "code"), as_dt(attr(it, "closes")))


@indicator("routine_both_doses", S_ROUTINE, "Both routine doses (two-dose profiles)",
           "Women for whom the engine plans two or more routine doses and whose last routine "
           "window closed in the month; numerator: every routine dose given (on time or late).",
           "all routine doses given", "women with two routine doses, last window closed in the month")
def _routine_both(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    items = [it for it in case.items_of(Category.ROUTINE) if eligible(it)]
    if len(items) < 2:
        return
    last = max(items, key=lambda it: as_dt(attr(it, "closes")) or datetime.min.replace(tzinfo=timezone.utc))
    if not closed_in(month, as_dt(attr(last, "closes")), tz):
        return
    ok = all(done(it) for it in items)
    yield Hit(case, ok, "both" if ok else "incomplete", None, attr(last, "code"), as_dt(attr(last, "closes")))



def _is_event_dose(code: Any) -> bool:
    base, ref = parse_item_code(str(code))
    return base == ItemCode.EVENT_DOSE and ref is not None


def _event_hits(case: Case, month: Month, tz: tzinfo) -> Iterator[tuple[Any, dict, datetime]]:
    for it in case.items_of(Category.EVENT):
        if not _is_event_dose(attr(it, "code")) or not eligible(it):
            continue
        ev = case.entry(attr(it, "related_id"))
        if ev is None:
            raise ReportError(f"care plan item {attr(it, 'code')} of pregnancy {case.id} names event "
                              f"{attr(it, 'related_id')!r}, which is not among its records")
        at = parse_utc(ev["occurred_at"])
        if month.contains(at, tz):
            yield it, ev, at


_EVENT_DEN = "sensitising events in the month needing anti-D"
_EVENT_DEF = ("Sensitising events that happened in the month for which the care engine plans an "
              "anti-D dose (the woman is eligible). ")


@indicator("event_on_time", S_EVENT, "Event dose within 72 h",
           _EVENT_DEF + "Numerator: the engine judges the dose on time (inside its window, 72 h in "
           "the usual profiles).", "dose on time", _EVENT_DEN)
def _event_on_time(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    for it, ev, _at in _event_hits(case, month, tz):
        o = outcome_of(it)
        yield Hit(case, o == "on-time", o, None, attr(it, "code"), as_dt(attr(it, "closes")), ev["id"],
                  {"event": ev.get("event_kind")})


@indicator("event_late", S_EVENT, "Event dose late",
           _EVENT_DEF + "Numerator: dose given after the window (the engine's 'late').",
           "dose late", _EVENT_DEN)
def _event_late(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    for it, ev, _at in _event_hits(case, month, tz):
        o = outcome_of(it)
        yield Hit(case, o == "late", o, None, attr(it, "code"), as_dt(attr(it, "closes")), ev["id"],
                  {"event": ev.get("event_kind")})


@indicator("event_none", S_EVENT, "Event without a dose",
           _EVENT_DEF + "Numerator: no dose recorded for the event and its deadline passed (follow-up "
           "list); a dose whose 72 hours were still running when the report was made is listed for "
           "follow-up but not counted.",
           "no dose", _EVENT_DEN)
def _event_none(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    for it, ev, _at in _event_hits(case, month, tz):
        o = outcome_of(it)
        miss = o == "not-given"
        follow = (f"no anti-D after {ev.get('event_kind')}" if miss
                  else f"anti-D after {ev.get('event_kind')}: {OPEN_FOLLOW_UP}" if o == "open" else None)
        yield Hit(case, miss, o, follow,
                  attr(it, "code"), as_dt(attr(it, "closes")), ev["id"], {"event": ev.get("event_kind")})

