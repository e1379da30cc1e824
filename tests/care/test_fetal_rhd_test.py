"""The plan item fetal-rhd-test: a cell-free fetal RHD test for a woman managed as RhD negative
when the profile targets prophylaxis (routine.targeted_prophylaxis; NICE DG25 (2016) 1.1:
high-throughput fetal RHD genotyping to guide antenatal anti-D). Window: from 11+2 (NICE DG25,
from memory), on time to the end of 25+6 and late to the end of 33+6 (common practice).

Standard pregnancy (builders): LMP 2026-03-01, so 11+2 (79 days) is 2026-05-19, 25+6 (181 days)
is 2026-08-29 and 33+6 (237 days) is 2026-10-24; facility time zone UTC."""
import pytest

from clinic.care import load_profile
from tests.care.builders import birth, booked_negative, item, make_plan, rec, typing, utc


@pytest.mark.parametrize("now, state", [
    (utc(2026, 5, 18, 23, 59), "not-yet-due"),   # before 11+2
    (utc(2026, 5, 19), "due"),                   # 11+2
    (utc(2026, 8, 30), "due"),                   # the last moment of 25+6 (closes = next midnight)
    (utc(2026, 8, 30, 0, 1), "overdue"),         # 26+0
    (utc(2026, 10, 25), "overdue"),              # end of 33+6
    (utc(2026, 10, 25, 0, 1), "missed"),         # 34+0
])
def test_fetal_rhd_test_window_on_the_bsh_profile(now, state):
    it = item(make_plan(booked_negative(), now=now), "fetal-rhd-test")
    assert (it.category, it.opens, it.closes, it.late_until) == ("typing", utc(2026, 5, 19), utc(2026, 8, 30),
                                                               utc(2026, 10, 25))
    assert it.state == state


def test_fetal_rhd_test_is_done_when_a_fetal_rhd_record_exists():
    cf = rec("fetal_rhd", result="negative", sampled_on="2026-06-20")
    plan = make_plan(booked_negative() + [cf], now=utc(2026, 9, 14))
    it = item(plan, "fetal-rhd-test")
    assert (it.state, it.done_record_id, it.done_at, it.timeliness) == ("done", cf["id"], utc(2026, 6, 20), "on-time")
    # NICE DG25 (2016) 1.1: the negative result is what lets the routine dose be not needed
    assert item(plan, "routine-dose-1").state == "not-needed"
    late = rec("fetal_rhd", result="positive", sampled_on="2026-09-01")   # 26+2, after 25+6
    assert item(make_plan(booked_negative() + [late], now=utc(2026, 9, 2)), "fetal-rhd-test").timeliness == "late"


def test_fetal_rhd_test_not_needed_when_the_profile_does_not_target_prophylaxis():
    # acog-2017: targeted_prophylaxis = false (ACOG PB 181 does not recommend routine cell-free
    # fetal RHD testing, from memory)
    it = item(make_plan(booked_negative(), now=utc(2026, 6, 1), profile="acog-2017"), "fetal-rhd-test")
    assert it.state == "not-needed" and "targeted_prophylaxis" in it.reason
    # a facility that sets it true gets the item
    on = make_plan(booked_negative(), now=utc(2026, 6, 1), profile="acog-2017",
                   overrides={"routine.targeted_prophylaxis": True})
    assert item(on, "fetal-rhd-test").state == "due"


def test_fetal_rhd_test_not_needed_for_a_woman_managed_as_rhd_positive():
    it = item(make_plan([typing("positive")], now=utc(2026, 6, 1)), "fetal-rhd-test")
    assert it.state == "not-needed" and "RhD positive" in it.reason


def test_fetal_rhd_test_after_the_birth():
    # born after 25+6 without a test: no longer needed (issue 11 rule 3: the test only informs
    # antenatal anti-D, NICE DG25 (2016) 1.1; the cord typing answers it now), never missed;
    # born before: not needed
    late = item(make_plan(booked_negative() + [birth("2026-10-01T10:00:00Z")], now=utc(2026, 10, 2)),
                "fetal-rhd-test")
    assert late.state == "not-needed" and late.reason.startswith("no longer needed")
    assert item(make_plan(booked_negative() + [birth("2026-08-01T10:00:00Z")], now=utc(2026, 8, 2)),
                "fetal-rhd-test").state == "not-needed"


@pytest.mark.parametrize("pid", ["bsh-2014", "acog-2017"])
def test_fetal_rhd_profile_values(pid):
    # 11+2 = 79 days (NICE DG25, from memory); 25+6 = 181 and 33+6 = 237 days (common practice)
    p = load_profile(pid)
    assert [p.ga(f"fetal_rhd.{k}") for k in ("opens_ga", "closes_ga", "late_until_ga")] == [79, 181, 237]
    assert p.get("routine.targeted_prophylaxis") is (pid == "bsh-2014")
