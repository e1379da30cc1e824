"""Routine antenatal anti-D: the windows of each regimen, the screen sample before the
first dose, and the states not-yet-due / due / overdue / missed / done / not-needed.

Windows (LMP 2026-03-01; UTC facility): 28+0 = 2026-09-13, 34+0 = 2026-10-25."""
from zoneinfo import ZoneInfo

import pytest

from tests.care.builders import alert_codes, birth, booked_negative, dose, item, make_plan, rec, screen, utc


def test_bsh_two_dose_windows():
    # NICE TA156 (2008) 3.1: 500 IU at 28 and at 34 weeks; on time within that week
    # (common practice), late until the profile's limit (common practice)
    plan = make_plan(booked_negative(), now=utc(2026, 9, 1))
    r1, r2 = item(plan, "routine-dose-1"), item(plan, "routine-dose-2")
    assert (r1.opens, r1.closes, r1.dose_iu) == (utc(2026, 9, 13), utc(2026, 9, 20), 500)
    assert (r2.opens, r2.closes, r2.dose_iu) == (utc(2026, 10, 25), utc(2026, 11, 1), 500)
    assert r1.state == r2.state == "not-yet-due"


@pytest.mark.parametrize("profile, overrides, closes, iu", [
    # NICE TA156 (2008) 3.3: 1500 IU once between 28 and 30 weeks; closing at the end of 30+0
    # (not 30+6) is common practice
    ("bsh-2014-single", None, utc(2026, 9, 28), 1500),
    ("bsh-2014", {"routine.regimen": "single"}, utc(2026, 9, 28), 1500),
    # ACOG PB 181 (2017), Level A: at 28 weeks (the 300 µg dose: from memory); on time to the end
    # of 29+6 (common practice)
    ("acog-2017", None, utc(2026, 9, 27), 1500),
])
def test_single_dose_regimens(profile, overrides, closes, iu):
    plan = make_plan(booked_negative(), now=utc(2026, 9, 14), profile=profile, overrides=overrides)
    r1 = item(plan, "routine-dose-1")
    assert (r1.state, r1.opens, r1.closes, r1.dose_iu, r1.dose_ug) == ("due", utc(2026, 9, 13), closes, iu, iu / 5)
    assert plan.item("routine-dose-2") is None


@pytest.mark.parametrize("now, state", [
    (utc(2026, 9, 12, 23, 59), "not-yet-due"),
    (utc(2026, 9, 13), "due"),
    (utc(2026, 9, 20), "due"),                 # the last instant of 28+6
    (utc(2026, 9, 20, 0, 1), "overdue"),       # window closed, late dose still worth giving
    (utc(2026, 10, 24, 23, 59), "overdue"),    # up to the end of 33+6 = 2026-10-24 (common practice)
    (utc(2026, 10, 25, 0, 1), "missed"),
])
def test_state_moves_with_time(now, state):
    assert item(make_plan(booked_negative(), now=now), "routine-dose-1").state == state


@pytest.mark.parametrize("given_at, timeliness", [
    ("2026-09-19T23:59:00Z", "on-time"),
    ("2026-09-20T00:01:00Z", "late"),
])
def test_timeliness_of_a_given_dose(given_at, timeliness):
    plan = make_plan(booked_negative() + [screen("2026-09-10T09:00:00Z"), dose(given_at, 500)],
                     now=utc(2026, 10, 1))
    r1 = item(plan, "routine-dose-1")
    assert (r1.state, r1.timeliness) == ("done", timeliness)


def test_local_time_not_utc_sets_the_window():
    # Facility in Africa/Nairobi (UTC+3): 28+0 starts at local midnight = 21:00 UTC the day before
    tz = ZoneInfo("Africa/Nairobi")
    plan = make_plan(booked_negative(), now=utc(2026, 9, 12, 21, 30), tz=tz)
    r1 = item(plan, "routine-dose-1")
    assert r1.opens == utc(2026, 9, 12, 21) and r1.closes == utc(2026, 9, 19, 21)
    assert r1.state == "due"   # 00:30 local on 13 September is 28+0 there, though UTC still says 12 September
    assert plan.dating["ga_days"] == 28 * 7
    late = make_plan(booked_negative() + [screen("2026-09-10T09:00:00Z"), dose("2026-09-19T21:01:00Z", 500)],
                     now=utc(2026, 10, 1), tz=tz)
    assert item(late, "routine-dose-1").timeliness == "late"   # 00:01 local on 20 September = 29+0


def test_pre_dose_screen_done_when_sampled_before_the_dose():
    # BSH 2016 (White et al.), abstract: antibody screen at booking and at 28 weeks; taken before the
    # routine dose, and ACOG PB 181's repeat screen: from memory
    plan = make_plan(booked_negative() + [screen("2026-09-13T09:00:00Z"), dose("2026-09-13T10:00:00Z", 500)],
                     now=utc(2026, 9, 20))
    assert item(plan, "pre-dose-screen").state == "done"
    assert "routine-before-screen" not in alert_codes(plan)


def test_routine_dose_before_the_screen_sample_is_flagged():
    plan = make_plan(booked_negative() + [dose("2026-09-13T10:00:00Z", 500), screen("2026-09-13T11:00:00Z")],
                     now=utc(2026, 9, 20))
    assert item(plan, "pre-dose-screen").state == "missed"
    assert "routine-before-screen" in alert_codes(plan)


def test_targeted_prophylaxis_on_a_negative_fetal_rhd():
    # NICE DG25 (2016) 1.1: fetal RHD genotype testing recommended to guide antenatal anti-D
    # prophylaxis, so a fetal RHD negative result -> no routine antenatal anti-D
    cf = rec("fetal_rhd", result="negative", sampled_on="2026-06-20")
    plan = make_plan(booked_negative() + [cf], now=utc(2026, 9, 14))
    assert item(plan, "routine-dose-1").state == "not-needed"
    assert item(plan, "routine-dose-1").dose_iu is None
    assert plan.fetal_rhd_probability == 0.0
    # the postpartum dose still waits for the baby's group
    assert item(plan, "postpartum-dose").state == "not-yet-due"
    # acog-2017 does not use targeted prophylaxis: still due, with an info alert
    acog = make_plan(booked_negative() + [cf], now=utc(2026, 9, 14), profile="acog-2017")
    assert item(acog, "routine-dose-1").state == "due"
    assert "fetal-rhd-negative-not-used" in alert_codes(acog)


def test_inconclusive_fetal_rhd_is_treated_as_positive():
    cf = rec("fetal_rhd", result="inconclusive", sampled_on="2026-06-20")
    plan = make_plan(booked_negative() + [cf], now=utc(2026, 9, 14))
    assert item(plan, "routine-dose-1").state == "due"
    assert plan.fetal_rhd["managed_as"] == "positive"


def test_birth_before_the_window_means_not_needed_and_after_means_missed():
    early = make_plan(booked_negative() + [birth("2026-09-01T10:00:00Z")], now=utc(2026, 9, 2),
                      preg=None)
    assert item(early, "routine-dose-1").state == "not-needed"
    late = make_plan(booked_negative() + [birth("2026-10-01T10:00:00Z")], now=utc(2026, 10, 2))
    assert item(late, "routine-dose-1").state == "missed"
    assert item(late, "routine-dose-2").state == "not-needed"


def test_partner_rhd_negative_is_an_informed_choice_not_a_cancellation():
    # NICE TA41 (2002) 1.2, unchanged by TA156 (2008): RAADP may be unnecessary if she is in a stable
    # relationship with the father and he is RhD negative ("paternity certain" is that condition)
    pt = rec("partner_typing", rhd="negative", paternity_certain=True, tested_on="2026-05-02")
    plan = make_plan(booked_negative() + [pt], now=utc(2026, 9, 14))
    assert item(plan, "routine-dose-1").state == "due"
    assert "partner-rhd-negative" in alert_codes(plan)
    assert plan.fetal_rhd_probability == 0.0
