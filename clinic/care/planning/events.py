"""Sensitising events: the anti-D dose within the deadline, the FMH test after the event, and
repeat doses while bleeding continues."""
from __future__ import annotations

import functools
import tomllib
from datetime import datetime, timedelta
from importlib import resources

from clinic.care import calc, codes
from clinic.care.codes import AlertCode
from clinic.care.errors import CareInputError
from clinic.care.planning import carried
from clinic.care.planning.core import (
    GA_RULES_MAX_DAYS,
    OPEN_STATES,
    Dose,
    Planner,
    Record,
    fmt,
    window_state,
)
from clinic.care.planning.doses import event_key, routine_given_by
from clinic.care.planning.fmh import fmh_test_done
from clinic.records.choices import event_words
from clinic.records.values import format_ga, parse_ga, parse_utc


@functools.lru_cache(maxsize=1)
def event_ga_ranges() -> tuple[str, dict[str, tuple[int, int]]]:
    """The usual GA range of each event kind, from clinic/care/event_ga.toml (data, reviewable)."""
    doc = tomllib.loads(resources.files("clinic.care").joinpath("event_ga.toml").read_text(encoding="utf-8"))
    ranges = {k: (parse_ga(lo), parse_ga(hi)) for k, (lo, hi) in doc["ranges"].items()}
    return doc["source"], ranges


def sensitising_events(pl: Planner) -> None:
    for e in pl.h.of("event"):
        _event(pl, e)


def _event(pl: Planner, e: Record) -> None:
    p, tz = pl.p, pl.tz
    ev = p.get("events")
    hours = timedelta(hours=ev["deadline_hours"])
    late = timedelta(days=ev["late_window_days"])
    words = event_words(e["event_kind"])
    t = pl.h.time[e["id"]]
    ga = pl.ga_of(e, t)
    try:
        ed = calc.event_dose(e["event_kind"], max(0, min(ga, GA_RULES_MAX_DAYS)), p, products=pl.ctx.products,
                             ongoing=bool(e.get("ongoing")), bleeding_heavy=e.get("bleeding_heavy"),
                             bleeding_repeated=e.get("bleeding_repeated"), abdominal_pain=e.get("abdominal_pain"))
    except CareInputError as err:
        raise CareInputError(f"event {e['id']}.{err.field}", err.errors[err.field]) from None
    src, ranges = event_ga_ranges()
    lo_hi = ranges.get(e["event_kind"])
    if lo_hi and not lo_hi[0] <= ga <= lo_hi[1]:
        pl.alert(AlertCode.EVENT_GA_UNUSUAL, "warning",
                 f"{words} recorded at {format_ga(ga)}, outside its usual "
                 f"{format_ga(lo_hi[0])} to {format_ga(lo_hi[1])}: check the kind of event and its date "
                 f"(the anti-D dose is still planned)", src, [e["id"]])
    closes, late_until = t + hours, t + late
    it = pl.add(codes.event_dose_code(e["id"]), f"Anti-D after {words} at {format_ga(ga)}", "due", ed.reason,
                ed.source, due=t, opens=t, closes=closes, late_until=late_until, dose_iu=ed.dose_iu,
                related_id=e["id"])
    given = pl.assigned.get(event_key(e["id"]), [])
    if given:
        pl.mark_done(it, given[0], closes)
        total = sum(d.iu for d in given)
        it.reason = f"given {fmt(given[0].at, tz)} ({given[0].iu} IU)" + (
            "" if it.timeliness == "on-time" else f", after the {ev['deadline_hours']:g}-hour deadline")
        if ed.dose_iu and total < ed.dose_iu:
            pl.alert(AlertCode.DOSE_BELOW_REQUIRED, "warning",
                     f"{total} IU given for the {words} at {format_ga(ga)}; the profile asks for "
                     f"{ed.dose_iu} IU: give the difference", ed.source, [e["id"]] + [d.id for d in given])
    elif pl.stop_reason():
        it.state, it.reason, it.dose_iu = "not-needed", pl.stop_reason() or "", None
    elif pl.fetal["targeted_not_needed"]:
        it.state, it.dose_iu = "not-needed", None
        it.reason = "cell-free fetal RHD negative: anti-D for events not needed"
    elif not ed.needed:
        it.state, it.dose_iu = "not-needed", None
        if ed.conditional and e.get("ongoing"):
            _early_bleeding_alert(pl, e, words, ga, ed, "bleeding is recorded as continuing: review her; if it "
                                  f"becomes {calc.BLEEDING_CONDITION}, amend the event and")
    elif ed.conditional and ed.condition_met is None and not e.get("ongoing"):
        it.state, it.dose_iu = "not-needed", None
        missing = calc.unrecorded_bleeding_facts(e)
        it.reason = (f"{words} at {format_ga(ga)}: whether the bleeding is {' / '.join(missing)} is not recorded; "
                     f"without any of these no anti-D is needed before {format_ga(p.band_for(ga).to_ga_days + 1)} "
                     f"(ask, and amend the event)")
        cont = " Bleeding is recorded as continuing." if e.get("ongoing") else ""
        _early_bleeding_alert(pl, e, words, ga, ed, f"the record does not say whether the bleeding is "
                              f"{' / '.join(missing)}.{cont} A clinician asks and amends the event; if any,")
    else:
        if ed.conditional and ed.condition_met is None:
            # Bleeding that continues, with heavy / repeated / pain not recorded (entries made before
            # those facts were asked read this way): when in doubt the dose stays due, never dropped.
            missing = calc.unrecorded_bleeding_facts(e)
            it.reason += (f"; bleeding continues and whether it is {' / '.join(missing)} is not recorded: "
                          f"the dose stays due until the event says otherwise")
            _early_bleeding_alert(pl, e, words, ga, ed, f"bleeding continues and the record does not say "
                                  f"whether it is {' / '.join(missing)}; a clinician asks and amends the event;")
        it.state = window_state(pl.now, t, closes, late_until)
        if it.state == "overdue":
            it.reason = (f"the {ev['deadline_hours']:g}-hour deadline passed at {fmt(closes, tz)}: give "
                         f"{ed.dose_iu} IU now, a late dose may still protect (until {fmt(late_until, tz)})")
            pl.alert(AlertCode.EVENT_DOSE_OVERDUE, "danger",
                     f"no anti-D after the {words} of {fmt(t, tz)}: deadline passed, give it now "
                     f"(late window open until {fmt(late_until, tz)})", ed.source, [e["id"]])
        elif it.state == "missed":
            it.reason = "no anti-D within the deadline or the late window"
            pl.alert(AlertCode.EVENT_DOSE_MISSED, "danger",
                     f"no anti-D was given after the {words} of {fmt(t, tz)}: the late window closed "
                     f"{fmt(late_until, tz)}; tell the clinician: {carried.follow_up(pl, t, 'the ' + words)}",
                     ed.source, [e["id"]])
        elif pl.rhd["managed_as"] in ("untyped", "retest"):
            it.reason += "; type the woman now — give only if RhD negative"
        if routine_given_by(pl, t) and ev["after_routine_dose_needs_own_dose"] and it.state in OPEN_STATES:
            it.reason += "; the routine dose already given does not cover this event"
    if ed.fmh_test_required and it.state != "not-needed" and not pl.stop_reason():
        _event_fmh_test(pl, e, words, ga, t, closes, late_until)
    if ed.repeat_every_days and given and it.state == "done":
        _repeat_dose(pl, e, words, given, ed.repeat_every_days, ed.repeat_dose_iu, ed.source, hours, late)


def _early_bleeding_alert(pl: Planner, e: Record, words: str, ga: int, ed: calc.EventDose, what: str) -> None:
    """Bleeding of a conditional kind at this GA: a clinician judges it (BSH 2014: anti-D only for
    bleeding that is heavy, repeated or with abdominal pain)."""
    ev = pl.p.get("events")
    pl.alert(AlertCode.EARLY_BLEEDING_CHECK, "warning",
             f"{words} at {format_ga(ga)}: {what} anti-D {pl.p.band_for(ga).dose_iu} IU within "
             f"{ev['deadline_hours']:g} h is due", ed.source, [e["id"]])


def _event_fmh_test(pl: Planner, e: Record, words: str, ga: int, t: datetime, closes: datetime,
                    late_until: datetime) -> None:
    fit = pl.add(codes.event_fmh_code(e["id"]), f"FMH test after {words} at {format_ga(ga)}", "due",
                 "take a sample for an FMH test (Kleihauer-Betke or flow cytometry), ideally before "
                 "the anti-D, to see whether more anti-D is needed", pl.p.section_source("fmh"),
                 due=t, opens=t, closes=closes, late_until=late_until, related_id=e["id"])
    fmhs = pl.h.of("fmh")
    tests = [f for f in fmhs if f.get("covers_id") == e["id"]] or \
            [f for f in fmhs if not f.get("covers_id") and t <= parse_utc(f["sampled_at"]) <= late_until]
    fmh_test_done(pl, fit, tests, closes, late_until, t)


def _repeat_dose(pl: Planner, e: Record, words: str, given: list[Dose], every_days: int, dose_iu: int | None,
                 source: str, hours: timedelta, late: timedelta) -> None:
    """Continuing bleeding: the next dose is due ``every_days`` after the last one."""
    last = given[-1].at
    due = last + timedelta(days=every_days)
    rit = pl.add(codes.event_repeat_code(e["id"]), f"Repeat anti-D for continuing bleeding after {words}", "due",
                 f"continuing bleeding: at least {dose_iu} IU every {every_days // 7} weeks "
                 f"(last {fmt(last, pl.tz)}), with an FMH test", source,
                 due=due, opens=due - timedelta(days=7), closes=due + hours, late_until=due + late,
                 dose_iu=dose_iu, related_id=e["id"])
    if pl.born_at and pl.born_at < due:
        rit.state, rit.reason = "not-needed", "the baby was born; the postpartum dose follows"
    elif pl.stop_reason():
        rit.state, rit.reason = "not-needed", pl.stop_reason() or ""
    else:
        rit.state = window_state(pl.now, rit.opens, rit.closes, rit.late_until)
