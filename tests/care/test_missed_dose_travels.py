"""A missed dose travels with the woman: the plan says what follows a missed postpartum or event
dose (an antibody screen later, and at her next booking), and a later pregnancy planned with
the earlier one's summary (``earlier=``) raises an alert at booking.

Sources: the follow-up screen about 6 months (180 days) after the birth or event is common
practice (profile section missed_dose; BSH 2014 gives no interval in the texts read); the
antibody screen at booking in every pregnancy: BSH 2016 (White et al., Transfus Med
26:246-263), abstract; ACOG PB 181 (2017), from memory. The late windows: BSH 2014 key recs
(10 days after an event), from memory for birth."""
from datetime import date, timedelta, timezone

import pytest

from clinic.care import CareInputError, load_profile, plan_pregnancy
from clinic.care.model import EarlierPregnancy
from clinic.care.planning.carried import summarise_earlier
from tests.care.builders import (
    alert_codes,
    birth,
    booked_negative,
    event,
    make_plan,
    pregnancy,
    screen,
    utc,
    woman,
)

BORN = utc(2026, 11, 28, 10)


def _missed_birth(*extra, now=BORN + timedelta(days=11)):
    return make_plan(booked_negative() + [birth("2026-11-28T10:00:00Z", id="b1"), *extra], now=now)


def test_a_missed_postpartum_dose_says_what_follows():
    plan = _missed_birth()
    (m,) = plan.missed_doses
    assert (m.code, m.related_id, m.occurred_at) == ("postpartum-dose", "b1", BORN)
    assert m.missed_at == BORN + timedelta(days=10)                       # the late window closed
    assert m.screen_from == date(2027, 5, 27)                              # 180 days after the birth: common practice
    assert "antibody screen from 2027-05-27 (about 6 months after the birth)" in m.follow_up
    assert "next pregnancy" in m.follow_up
    (a,) = plan.alerts_with("postpartum-dose-missed")
    assert "2027-05-27" in a.message and "next pregnancy" in a.message
    assert plan.to_dict()["missed_doses"][0]["screen_from"] == "2027-05-27"


@pytest.mark.parametrize("days, screen_from, words", [(90, date(2027, 2, 26), "about 3 months"),
                                                       (45, date(2027, 1, 12), "45 days")])
def test_the_follow_up_interval_is_the_profile_s(days, screen_from, words):
    plan = make_plan(booked_negative() + [birth("2026-11-28T10:00:00Z")], now=BORN + timedelta(days=11),
                     overrides={"missed_dose.follow_up_screen_after_days": days})
    assert plan.missed_doses[0].screen_from == screen_from
    assert f"({words} after the birth)" in plan.missed_doses[0].follow_up


def test_a_missed_event_dose_says_what_follows():
    e = event("2026-08-01T10:00:00Z", "abdominal-trauma", id="ev1")
    plan = make_plan(booked_negative() + [e], now=utc(2026, 8, 20))
    (m,) = [m for m in plan.missed_doses if m.code.startswith("event-dose")]
    assert m.related_id == "ev1" and m.screen_from == date(2027, 1, 28)
    assert "after the abdominal trauma" in m.follow_up
    assert "2027-01-28" in plan.alerts_with("event-dose-missed")[0].message


def test_an_open_or_given_dose_is_not_missed():
    assert _missed_birth(now=BORN + timedelta(hours=5)).missed_doses == []


def test_the_follow_up_screen_once_taken_is_named():
    plan = _missed_birth(screen("2027-06-01T09:00:00Z", id="s9"), now=utc(2027, 6, 2))
    (m,) = plan.missed_doses
    assert m.screen_id == "s9" and m.follow_up.startswith("follow-up antibody screen taken 2027-06-01: negative")


# ---- the next pregnancy -------------------------------------------------------------------

def _earlier(**kw):
    entries = booked_negative() + [birth("2026-11-28T10:00:00Z", id="b1")]
    plan = make_plan(entries, now=utc(2028, 1, 1))
    return summarise_earlier(pregnancy(), entries, plan, **kw)


NEXT_NOW = utc(2028, 3, 1)


def _next(earlier, *entries, now=NEXT_NOW):
    preg = dict(pregnancy(booked_on="2028-02-28", lmp="2027-12-20"), id="p2")
    return plan_pregnancy(woman(), preg, list(entries), now=now, profile=load_profile("bsh-2014"), earlier=earlier)


def test_the_summary_of_an_earlier_pregnancy():
    e = _earlier()
    assert (e.pregnancy_id, e.booked_on, e.ended_on) == ("p1", "2026-05-01", "2026-11-28")
    assert e.missed == ("anti-D after birth (2026-11-28)",) and e.antibodies == () and e.problem is None


def test_booking_again_after_a_missed_dose_raises_an_alert():
    plan = _next([_earlier()])
    (a,) = plan.alerts_with("earlier-dose-missed")
    assert a.severity == "warning" and a.record_ids == ["p1"]
    assert "anti-D after birth (2026-11-28)" in a.message and "take the booking antibody screen now" in a.message
    assert plan.to_dict()["earlier"][0]["missed"] == ["anti-D after birth (2026-11-28)"]


def test_once_screened_in_this_pregnancy_the_alert_says_the_result():
    plan = _next([_earlier()], screen("2028-02-28T09:00:00Z", id="s1"))
    (a,) = plan.alerts_with("earlier-dose-missed")
    assert a.severity == "info" and "screen of 2028-02-28: negative" in a.message and a.record_ids == ["p1", "s1"]


def test_an_antibody_found_earlier_raises_a_danger_alert():
    immune = screen("2026-09-13T08:00:00Z", "positive", antibodies=["anti-D"], anti_d_origin="immune", titre=16,
                    titre_antibody="anti-D")
    entries = booked_negative() + [immune]
    earlier = summarise_earlier(pregnancy(), entries, make_plan(entries, now=utc(2027, 1, 1)))
    assert earlier.antibodies == ("anti-D (immune, 2026-09-13)",)
    (a,) = _next([earlier]).alerts_with("earlier-antibody")
    assert a.severity == "danger" and "surveillance pathway" in a.message


def test_passive_anti_d_is_not_handed_on():
    from tests.care.builders import dose
    passive = screen("2026-10-01T08:00:00Z", "positive", antibodies=["anti-D"], anti_d_origin="passive",
                     anti_d_iu_ml=0.1)
    entries = booked_negative() + [screen("2026-09-13T08:00:00Z"), dose("2026-09-13T09:00:00Z", 500), passive]
    earlier = summarise_earlier(pregnancy(), entries, make_plan(entries, now=utc(2026, 10, 2)))
    assert earlier.antibodies == ()


def test_an_unreadable_earlier_pregnancy_is_said_not_dropped():
    plan = _next([EarlierPregnancy("p0", "2025-01-01", problem="entry x: typing.rhd is required")])
    assert "earlier-pregnancy-unreadable" in alert_codes(plan)


def test_no_earlier_pregnancy_no_alert():
    assert not [c for c in alert_codes(_next([])) if c.startswith("earlier")]


@pytest.mark.parametrize("bad", ["p1", [{"pregnancy_id": "p1"}], 3])
def test_earlier_must_be_summaries(bad):
    with pytest.raises(CareInputError) as e:
        _next(bad)
    assert "earlier" in e.value.errors


def test_local_dates_in_the_summary_follow_the_facility_zone():
    from zoneinfo import ZoneInfo
    e = _earlier(tz=ZoneInfo("Pacific/Kiritimati"))     # UTC+14: 10:00Z is already midnight of the next day
    assert (e.ended_on, e.missed) == ("2026-11-29", ("anti-D after birth (2026-11-29)",))
    assert _earlier(tz=timezone.utc).ended_on == "2026-11-28"
