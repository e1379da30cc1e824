"""Routine doses count in full on the day their window opens (local midnight of 28+0 / 34+0),
doses due now count today; not-needed, done and transferred pregnancies count nothing."""
from __future__ import annotations

from clinic.supply.forecast import forecast_products, needs_of_plan
from tests.supply import dataset as ds


def _needs(p):
    return needs_of_plan(p.plan(), pregnancy=p.pregnancy, start=ds.START, days=84, tz=ds.TZ)


def test_the_two_routine_doses_of_w1_fall_in_weeks_2_and_8():
    w1 = ds.clinic_a()["W1"]
    # EDD 3 Sep: 28+0 = 3 Sep - 84 d = 11 Jun = day 10 (week 2); 34+0 = 3 Sep - 42 d = 23 Jul = day 52 (week 8)
    routine = [(n.day, n.dose_iu, n.weight, n.code) for n in _needs(w1) if n.category == "routine"]
    assert routine == [(10, 500, 1.0, "routine-dose-1"), (52, 500, 1.0, "routine-dose-2")]
    assert ds.day(10).isoformat() == "2026-06-11" and ds.day(52).isoformat() == "2026-07-23"


def test_weekly_routine_vials():
    pregs = ds.clinic_a()
    fc = forecast_products(ds.needs(pregs), ds.rate(pregs), [ds.V500], start=ds.START, weeks=12)[0]
    # Only W1 has routine doses ahead: one 500 IU vial in week 2 and one in week 8.
    assert [w.routine_vials for w in fc.weeks] == [0, 1, 0, 0, 0, 0, 0, 1, 0, 0, 0, 0]


def test_fetal_rhd_negative_needs_no_routine_dose():
    # W5: 28+0 was 18 May, 34+0 is 29 Jun (day 28); the fetal RHD test is negative, the profile
    # targets prophylaxis, so the engine marks both not-needed and the birth weight is 0.
    assert _needs(ds.clinic_a()["W5"]) == []


def test_a_transferred_pregnancy_is_not_this_clinics_demand():
    gone = ds.clinic_a()["GONE"]
    assert any(i.state == "due" and i.code == "routine-dose-1" for i in gone.plan().items)
    assert _needs(gone) == []


def test_doses_due_now_count_today():
    pregs = ds.clinic_a()
    # W6: born 31 May, postpartum dose due; W7: event on 30 May, event dose (250 IU) due.
    assert [(n.day, n.dose_iu, n.weight) for n in _needs(pregs["W6"])] == [(0, 500, 1.0)]
    assert [(n.day, n.dose_iu, n.weight, n.category) for n in _needs(pregs["W7"])] == [(0, 250, 1.0, "event")]


def test_doses_after_the_horizon_do_not_count():
    # With a 4-week horizon (days 0-27), W1's second routine dose (day 52) is left out.
    w1 = ds.clinic_a()["W1"]
    assert [n.day for n in needs_of_plan(w1.plan(), pregnancy=w1.pregnancy, start=ds.START, days=28, tz=ds.TZ)
            if n.category == "routine"] == [10]
