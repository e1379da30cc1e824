"""Indicators of births to RhD-negative women: cord typing, the postpartum dose and FMH test."""
from __future__ import annotations

from collections.abc import Iterator
from datetime import tzinfo
from typing import Any

from clinic.care.codes import ItemCode
from clinic.records.values import parse_utc
from clinic.reports.indicators.registry import S_BIRTH, Hit, indicator
from clinic.reports.month import Month
from clinic.reports.pregnancy_case import OPEN_FOLLOW_UP, Case, as_dt, attr, done, eligible, outcome_of


def _birth_in(case: Case, month: Month, tz: tzinfo) -> dict | None:
    """The first birth record of an RhD-negative woman, if it falls in the month."""
    if case.managed_as != "negative":
        return None
    births = case.births()
    if births and month.contains(parse_utc(births[0]["born_at"]), tz):
        return births[0]
    return None


@indicator("births_neg", S_BIRTH, "Births to RhD-negative women",
           "Pregnancies of women the engine manages as RhD negative whose (first) birth is in the month.",
           "births", None)
def _births(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    b = _birth_in(case, month, tz)
    if b is not None:
        yield Hit(case, True, "born", due=parse_utc(b["born_at"]), record_id=b["id"])


@indicator("cord_typed", S_BIRTH, "Cord blood typed",
           "Of the births to RhD-negative women in the month, those whose cord-blood typing the "
           "care engine counts as done (every baby's RhD recorded as positive or negative).",
           "baby RhD recorded", "births to RhD-negative women in the month")
def _cord(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    b = _birth_in(case, month, tz)
    if b is None:
        return
    it = case.item(ItemCode.CORD_TYPING)
    ok = done(it)
    yield Hit(case, ok, "typed" if ok else "not-typed", None if ok else "baby's RhD not recorded",
              ItemCode.CORD_TYPING, parse_utc(b["born_at"]), b["id"])


def _pp_outcome(it: Any) -> str:
    """on-time, late (inside the engine's late window), after-window, or not-given."""
    o = outcome_of(it)
    if o == "late":
        done_at, late_until = as_dt(attr(it, "done_at")), as_dt(attr(it, "late_until"))
        if done_at is not None and late_until is not None and done_at > late_until:
            return "after-window"
    return o


def _postpartum_hit(case: Case, month: Month, tz: tzinfo) -> tuple[Any, dict] | None:
    b = _birth_in(case, month, tz)
    it = case.item(ItemCode.POSTPARTUM_DOSE)
    if b is None or not eligible(it):
        return None
    return it, b


_PP_DEN = "births to RhD-negative women in the month needing a postpartum dose"
_PP_DEF = ("Births in the month to RhD-negative women for whom the care engine plans a postpartum "
           "dose (baby RhD positive, or not known). ")


@indicator("postpartum_on_time", S_BIRTH, "Postpartum dose within 72 h",
           _PP_DEF + "Numerator: the engine judges the dose on time (72 h after the birth in the "
           "usual profiles).", "dose on time", _PP_DEN)
def _pp_on_time(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    h = _postpartum_hit(case, month, tz)
    if h:
        it, b = h
        o = _pp_outcome(it)
        yield Hit(case, o == "on-time", o, None, ItemCode.POSTPARTUM_DOSE, as_dt(attr(it, "closes")), b["id"])


@indicator("postpartum_late", S_BIRTH, "Postpartum dose late (inside the late window)",
           _PP_DEF + "Numerator: given after 72 h but inside the profile's late window (the engine's "
           "'late').", "dose late", _PP_DEN)
def _pp_late(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    h = _postpartum_hit(case, month, tz)
    if h:
        it, b = h
        o = _pp_outcome(it)
        yield Hit(case, o == "late", o, None, ItemCode.POSTPARTUM_DOSE, as_dt(attr(it, "closes")), b["id"])


@indicator("postpartum_missed", S_BIRTH, "Postpartum dose missed",
           _PP_DEF + "Numerator: no dose inside the late window (no dose recorded: follow-up list, still "
           "worth giving while the engine's late window is open; or a dose after the window). A birth "
           "whose 72 hours were still running when the report was made is listed but not counted.",
           "missed", _PP_DEN)
def _pp_missed(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    h = _postpartum_hit(case, month, tz)
    if h:
        it, b = h
        o = _pp_outcome(it)
        miss = o in ("not-given", "after-window")
        follow = ("postpartum anti-D not given" if o == "not-given"
                  else f"postpartum anti-D: {OPEN_FOLLOW_UP}" if o == "open" else None)
        yield Hit(case, miss, o, follow,
                  ItemCode.POSTPARTUM_DOSE, as_dt(attr(it, "closes")), b["id"],
                  {"late_until": attr(it, "late_until"), "state": attr(it, "state")})


@indicator("postpartum_fmh", S_BIRTH, "FMH tested (where the profile requires it)",
           "Births in the month to RhD-negative women for whom the care engine plans a "
           "postpartum FMH test; numerator: the test done.",
           "FMH tested", "births needing an FMH test")
def _pp_fmh(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    b = _birth_in(case, month, tz)
    it = case.item(ItemCode.POSTPARTUM_FMH)
    if b is None or not eligible(it):
        return
    ok = done(it)
    yield Hit(case, ok, "tested" if ok else "not-tested",
              None if ok else "postpartum FMH test not recorded", ItemCode.POSTPARTUM_FMH,
              as_dt(attr(it, "closes")), b["id"])

