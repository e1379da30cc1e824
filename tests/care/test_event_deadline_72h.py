"""A sensitising event: anti-D within 72 hours of the event (BSH 2014, Qureshi et al., key
recommendations: "as soon as possible and always within 72 h"; ACOG PB 181, 2017: from memory),
then the profile's late window (BSH 2014 key recommendations: up to 10 days; ACOG up to 28 days:
from memory), then missed. The boundary is exact to the minute."""
from datetime import timedelta

import pytest

from tests.care.builders import alert_codes, booked_negative, dose, event, item, make_plan, utc

T = utc(2026, 8, 1, 10, 0)        # 2026-08-01 is 21+6 on LMP 2026-03-01
EV = event("2026-08-01T10:00:00Z", "antepartum-haemorrhage", id="ev1")


@pytest.mark.parametrize("after, state", [
    (timedelta(hours=1), "due"),
    (timedelta(hours=72), "due"),                                  # exactly 72 h: still on time
    (timedelta(hours=72, minutes=1), "overdue"),                   # one minute past: late window
    (timedelta(days=10), "overdue"),                               # BSH 2014 key recs: up to 10 days after the event
    (timedelta(days=10, minutes=1), "missed"),
])
def test_bsh_event_states_by_the_minute(after, state):
    plan = make_plan(booked_negative() + [EV], now=T + after)
    it = item(plan, "event-dose:ev1")
    assert it.state == state
    assert it.closes == T + timedelta(hours=72) and it.late_until == T + timedelta(days=10)
    assert it.dose_iu == 500 and it.dose_ug == 100      # after 20 weeks: minimum 500 IU (BSH 2014 key recs)


def test_overdue_says_a_late_dose_is_still_worth_giving():
    plan = make_plan(booked_negative() + [EV], now=T + timedelta(days=4))
    it = item(plan, "event-dose:ev1")
    assert "give" in it.reason and "late dose may still protect" in it.reason
    assert "event-dose-overdue" in alert_codes(plan)


def test_missed_event_raises_a_danger_alert():
    plan = make_plan(booked_negative() + [EV], now=T + timedelta(days=11))
    assert "event-dose-missed" in alert_codes(plan)


@pytest.mark.parametrize("given_after, timeliness", [
    (timedelta(hours=72), "on-time"),
    (timedelta(hours=72, minutes=1), "late"),
])
def test_dose_at_the_boundary(given_after, timeliness):
    d = dose(f"{(T + given_after):%Y-%m-%dT%H:%M:%SZ}", 500, indication="sensitising-event", covers_id="ev1")
    plan = make_plan(booked_negative() + [EV, d], now=T + timedelta(days=5))
    it = item(plan, "event-dose:ev1")
    assert (it.state, it.timeliness, it.done_record_id) == ("done", timeliness, d["id"])


def test_acog_late_window_is_28_days():
    # ACOG PB 181 (2017): may be given up to 28 days when 72 h have passed (from memory)
    plan = make_plan(booked_negative() + [EV], now=T + timedelta(days=27), profile="acog-2017")
    assert item(plan, "event-dose:ev1").state == "overdue"
    plan = make_plan(booked_negative() + [EV], now=T + timedelta(days=28, minutes=1), profile="acog-2017")
    assert item(plan, "event-dose:ev1").state == "missed"


def test_fmh_test_required_from_20_weeks():
    # BSH 2014 key recs: after 20 weeks a test for FMH is required (20+0 boundary day: from memory)
    plan = make_plan(booked_negative() + [EV], now=T + timedelta(hours=2))
    assert item(plan, "event-fmh:ev1").state == "due"


def test_event_without_ga_days_gets_it_from_the_dating():
    # 2026-07-18 is 19+6 (LMP 2026-03-01): 250 IU and no FMH test; 2026-07-19 is 20+0: 500 IU + FMH
    # (BSH 2014 key recs: 12-20 weeks 250 IU, after 20 weeks 500 IU + FMH; placing 20+0 in the
    # later band is from memory)
    e1 = event("2026-07-18T10:00:00Z", "abdominal-trauma", id="e1")
    e2 = event("2026-07-19T10:00:00Z", "abdominal-trauma", id="e2")
    plan = make_plan(booked_negative() + [e1, e2], now=utc(2026, 7, 19, 12))
    assert item(plan, "event-dose:e1").dose_iu == 250
    assert item(plan, "event-dose:e2").dose_iu == 500
    assert [i.code for i in plan.items if i.code.startswith("event-fmh")] == ["event-fmh:e2"]


def test_event_after_a_routine_dose_still_needs_its_own_dose():
    # BSH 2014 (from memory): routine prophylaxis does not cover a later sensitising event
    r = dose("2026-09-14T10:00:00Z", 500)           # 28+1, routine
    e = event("2026-09-15T10:00:00Z", "abdominal-trauma", id="ev2")   # the next day
    plan = make_plan(booked_negative() + [r, e], now=utc(2026, 9, 15, 12))
    it = item(plan, "event-dose:ev2")
    assert it.state == "due" and it.dose_iu == 500
    assert "does not cover" in it.reason


def test_ongoing_bleeding_asks_for_a_repeat_after_6_weeks():
    # BSH 2014 (from memory): at least 500 IU every 6 weeks for continuing bleeding after 20 weeks
    e = event("2026-08-01T10:00:00Z", "antepartum-haemorrhage", ongoing=True, id="ev3")
    d = dose("2026-08-01T14:00:00Z", 500, indication="sensitising-event", covers_id="ev3")
    plan = make_plan(booked_negative() + [e, d], now=utc(2026, 9, 12, 15))
    rep = item(plan, "event-repeat:ev3")
    assert rep.due == utc(2026, 8, 1, 14) + timedelta(days=42)
    assert rep.state == "due" and rep.dose_iu == 500
