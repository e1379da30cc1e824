"""A dose whose deadline had not passed when the report was made is not counted as missed: it is
listed for follow-up ("deadline still open"), and counted once its deadline has passed.

Invented pregnancy booked 2026-05-01 (LMP 2026-03-01, the care builders' standard), RhD negative;
a bleed on 2026-05-31 at 20:00 UTC (13+0) needs anti-D within 72 hours (BSH 2014, Qureshi et al.,
Transfusion Medicine 24:8-20: "within 72 hours of the event").
"""
from datetime import datetime, timezone

from clinic.reports.coverage import Case, compute_month
from clinic.reports.month import Month
from tests.care.builders import booked_negative, event, make_plan, pregnancy, woman

MAY = Month.parse("2026-05")
F = "clinic-t"


def _report(now):
    entries = booked_negative() + [event("2026-05-31T20:00:00Z")]
    preg = dict(pregnancy(), id="p-bleed")
    case = Case(woman(), preg, entries, make_plan(entries, now=now, preg=preg), facility=F)
    return compute_month([case], MAY, timezone.utc, now=now, facilities=[F])


def test_an_event_dose_still_inside_its_72_hours_is_listed_but_not_counted_as_missed():
    rep = _report(datetime(2026, 6, 1, 8, 0, tzinfo=timezone.utc))   # 12 h after the bleed
    none = rep.cell(F, "event_none")
    assert (none.numerator, none.denominator) == (0, 1)
    (fu,) = [f for f in rep.follow_up if f.indicator == "event_none"]
    assert fu.outcome == "open" and "still open" in fu.what


def test_the_same_event_counts_as_without_a_dose_once_the_72_hours_have_passed():
    rep = _report(datetime(2026, 6, 4, 8, 0, tzinfo=timezone.utc))   # 84 h after the bleed
    none = rep.cell(F, "event_none")
    assert (none.numerator, none.denominator) == (1, 1)
    (fu,) = [f for f in rep.follow_up if f.indicator == "event_none"]
    assert fu.outcome == "not-given" and "no anti-D" in fu.what
