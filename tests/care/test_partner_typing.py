"""The plan item partner-typing: the RhD type of the baby's father, offered to a woman managed
as RhD negative from booking until the end of 27+6 (the profile's partner_typing.closes_ga), so
that a woman whose baby's father is RhD negative (paternity certain) can choose to decline
routine antenatal anti-D (NICE TA41 (2002) 1.2, unchanged by NICE TA156 (2008)). The window is
common practice. Whether the routine doses then become not needed is a profile setting
(routine.partner_negative_skips_routine, default false: still offered, with an info alert).

Standard pregnancy (builders): LMP 2026-03-01, booked 2026-05-01, EDD 2026-12-06, 28+0 is
2026-09-13; facility time zone UTC."""
import pytest

from clinic.care import ProfileError, load_profile
from tests.care.builders import alert_codes, birth, booked_negative, event, item, make_plan, rec, typing, utc


def _partner(rhd="positive", **kw):
    return rec("partner_typing", rhd=rhd, tested_on=kw.pop("tested_on", "2026-05-02"), **kw)


def test_partner_typing_is_due_from_booking_until_the_end_of_27_6():
    plan = make_plan(booked_negative(), now=utc(2026, 6, 1))
    it = item(plan, "partner-typing")
    # opens at booking (2026-05-01 local midnight); closes_ga 27+6 (common practice) = 2026-09-12,
    # so the deadline is the next midnight, 2026-09-13 00:00 = the start of 28+0
    assert (it.category, it.state, it.opens, it.closes) == ("typing", "due", utc(2026, 5, 1), utc(2026, 9, 13))
    # still worth doing until the birth: the day after the EDD (2026-12-06) at the latest
    assert it.late_until == utc(2026, 12, 7)
    assert item(plan, "partner-typing").source.startswith("NICE TA156")


def test_partner_typing_not_done_by_28_0_is_overdue_and_no_longer_needed_at_birth():
    assert item(make_plan(booked_negative(), now=utc(2026, 9, 13, 0, 1)), "partner-typing").state == "overdue"
    # issue 11 rule 3: the father's type only informs a choice before the birth (NICE TA41 (2002)
    # 1.2): after it, the task is no longer needed, never missed
    born = item(make_plan(booked_negative() + [birth("2026-10-30T10:00:00Z")], now=utc(2026, 10, 31)),
                "partner-typing")
    assert born.state == "not-needed" and born.reason.startswith("no longer needed")
    # born before the window closed (26 weeks): not needed any more, the cord typing decides
    early = make_plan(booked_negative() + [birth("2026-08-30T10:00:00Z")], now=utc(2026, 8, 31))
    assert item(early, "partner-typing").state == "not-needed"


def test_partner_typing_is_done_when_a_partner_typing_record_exists():
    pt = _partner("positive")
    it = item(make_plan(booked_negative() + [pt], now=utc(2026, 6, 1)), "partner-typing")
    assert (it.state, it.done_record_id, it.done_at, it.timeliness) == ("done", pt["id"], utc(2026, 5, 2), "on-time")
    late = _partner("positive", tested_on="2026-09-20")   # after the 27+6 window
    it = item(make_plan(booked_negative() + [late], now=utc(2026, 9, 21)), "partner-typing")
    assert (it.state, it.timeliness) == ("done", "late")


def test_partner_typing_recorded_as_unknown_is_not_done():
    # judgement: a record saying the father's RhD is not known types nobody; the item stays open
    it = item(make_plan(booked_negative() + [_partner("unknown")], now=utc(2026, 6, 1)), "partner-typing")
    assert it.state == "due" and it.done_record_id is None and "not known" in it.reason


def test_partner_typing_not_needed_for_a_woman_managed_as_rhd_positive():
    it = item(make_plan([typing("positive")], now=utc(2026, 6, 1)), "partner-typing")
    assert it.state == "not-needed" and "RhD positive" in it.reason


def test_partner_typing_while_her_own_typing_is_unknown_says_only_if_negative():
    # like the routine doses, the engine keeps the item open until she is typed
    it = item(make_plan([], now=utc(2026, 6, 1)), "partner-typing")
    assert it.state == "due" and "only if she is RhD negative" in it.reason


def test_partner_rhd_negative_keeps_routine_doses_offered_by_default():
    # NICE TA41 (2002) 1.2 / TA156: she MAY decline: her informed choice, so by default the doses
    # stay offered (routine.partner_negative_skips_routine = false) with an info alert
    pt = _partner("negative", paternity_certain=True)
    plan = make_plan(booked_negative() + [pt], now=utc(2026, 9, 14))
    assert item(plan, "routine-dose-1").state == "due"
    (a,) = plan.alerts_with("partner-rhd-negative")
    assert a.severity == "info" and a.record_ids == [pt["id"]] and "may choose to decline" in a.message


def test_partner_rhd_negative_makes_routine_doses_not_needed_only_if_the_profile_says_so():
    pt = _partner("negative", paternity_certain=True)
    ev = event("2026-09-20T10:00:00Z")
    plan = make_plan(booked_negative() + [pt, ev], now=utc(2026, 9, 21),
                     overrides={"routine.partner_negative_skips_routine": True})
    r1, r2 = item(plan, "routine-dose-1"), item(plan, "routine-dose-2")
    assert r1.state == r2.state == "not-needed" and r1.related_id == pt["id"]
    assert item(plan, "pre-dose-screen").state == "not-needed"
    # only routine prophylaxis: an event still needs its own dose (BSH 2014 key recs, 72 h)
    assert item(plan, "event-dose").state == "due"
    assert "partner-rhd-negative" in alert_codes(plan)
    # paternity not certain: the setting does not apply
    unsure = _partner("negative", paternity_certain=False)
    plan = make_plan(booked_negative() + [unsure], now=utc(2026, 9, 14),
                     overrides={"routine.partner_negative_skips_routine": True})
    assert item(plan, "routine-dose-1").state == "due" and "partner-rhd-negative" not in alert_codes(plan)


def test_skipping_routine_doses_needs_the_may_decline_setting():
    with pytest.raises(ProfileError) as e:
        load_profile("bsh-2014", overrides={"routine.partner_negative_skips_routine": True,
                                            "routine.partner_negative_may_decline": False})
    assert "partner_negative_may_decline" in str(e.value)


@pytest.mark.parametrize("pid", ["bsh-2014", "bsh-2014-single", "acog-2017", "acog-2017-early-2024"])
def test_partner_typing_profile_values(pid):
    # closes_ga 27+6 (196 - 1 days): common practice, known before the 28+0 routine dose;
    # skipping routine doses is off by default (NICE TA41 1.2: her choice)
    p = load_profile(pid)
    assert (p.get("partner_typing.offered"), p.ga("partner_typing.closes_ga")) == (True, 195)
    assert p.get("routine.partner_negative_skips_routine") is False


def test_partner_typing_not_offered_by_a_profile_is_not_needed():
    plan = make_plan(booked_negative(), now=utc(2026, 6, 1), overrides={"partner_typing.offered": False})
    assert item(plan, "partner-typing").state == "not-needed"
