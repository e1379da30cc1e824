"""Reasons say what is true: the words of each reason match the recorded facts."""
from datetime import timedelta

from tests.care.builders import (
    birth,
    booked_negative,
    event,
    item,
    make_plan,
    rec,
    screen,
    typing,
    utc,
)

BORN = utc(2026, 11, 28, 10)


def _twins(first, second, now=BORN + timedelta(hours=5)):
    b1 = birth("2026-11-28T10:00:00Z", baby_rhd=first, id="b1")
    b2 = birth("2026-11-28T10:20:00Z", baby_rhd=second, id="b2", dat="not-done")
    return make_plan(booked_negative() + [b1, b2], now=now)


def test_twins_one_positive_one_negative_are_not_called_not_known():
    # BSH 2014 key recs, post-delivery: anti-D (at least 500 IU) when the baby is D positive; with
    # twins one RhD-positive baby is enough (common practice)
    it = item(_twins("positive", "negative"), "postpartum-dose")
    assert (it.state, it.dose_iu) == ("due", 500)
    assert it.reason.startswith("1 of the 2 babies is RhD positive, 1 RhD negative: give 500 IU")
    assert "not known" not in it.reason


def test_twins_one_positive_one_not_tested():
    it = item(_twins("positive", "not-tested"), "postpartum-dose")
    assert it.reason.startswith("1 of the 2 babies is RhD positive, 1 not tested: give 500 IU")
    cord = item(_twins("positive", "not-tested"), "cord-typing")
    assert cord.state == "due" and cord.reason.startswith("1 of the 2 babies is RhD positive, 1 not tested: type "
                                                          "each baby not yet typed")


def test_twins_one_negative_one_not_tested_say_which_is_not_known():
    it = item(_twins("negative", "not-tested"), "postpartum-dose")
    assert it.state == "due"
    assert it.reason.startswith("no baby is known to be RhD positive (1 RhD negative, 1 not tested): the RhD group "
                                "of 1 of the 2 is not known")


def test_twins_both_negative_and_both_positive():
    assert item(_twins("negative", "negative"), "postpartum-dose").reason == \
        "all 2 babies are RhD negative: no anti-D needed"
    assert item(_twins("positive", "positive"), "postpartum-dose").reason.startswith("all 2 babies are RhD positive")


def test_one_baby_not_tested_is_not_known():
    plan = make_plan(booked_negative() + [birth("2026-11-28T10:00:00Z", baby_rhd="not-tested", dat="not-done")],
                     now=BORN + timedelta(hours=5))
    assert item(plan, "postpartum-dose").reason.startswith("the baby's RhD group is not known (not tested)")


def test_weak_d_already_genotyped_is_not_until_genotyped():
    # BSH 2016 (from memory) and Sandler et al., Transfusion 2015;55:680-689 (abstract): weak D types
    # 1, 2 and 3 managed as RhD positive; other types (here 4.0) as RhD negative
    plan = make_plan([typing("weak-d", weak_d_type="4.0", method="molecular")], now=utc(2026, 6, 1))
    assert plan.rhd["managed_as"] == "negative"
    assert "until genotyped" not in plan.rhd["reason"]
    assert plan.rhd["reason"] == ("weak D type 4.0 (genotyped): managed as RhD negative, as this type is not among "
                                  "those the profile manages as RhD positive (1, 2, 3)")
    assert "weak-d-genotype" not in [a.code for a in plan.alerts]


def test_weak_d_without_a_type_is_until_genotyped():
    plan = make_plan([typing("weak-d")], now=utc(2026, 6, 1))
    assert plan.rhd["reason"] == "weak D, type not known: managed as RhD negative until genotyped"


def _partner_negative():
    return rec("partner_typing", rhd="negative", paternity_certain=True, tested_on="2026-05-10")


def test_partner_negative_routine_dose_offered_says_she_may_decline_it():
    # NICE TA41 (2002) 1.2 / TA156 (2008): with the father RhD negative (paternity certain) she may
    # decline routine antenatal prophylaxis: her informed choice
    plan = make_plan(booked_negative() + [_partner_negative(), screen("2026-09-13T08:00:00Z")],
                     now=utc(2026, 9, 14))
    it = item(plan, "routine-dose-1")
    assert it.state == "due" and it.reason.endswith(
        "the baby's father is RhD negative and paternity is certain: after a shared decision she may choose to "
        "decline it")


def test_partner_negative_routine_dose_skipped_says_it_may_still_be_offered():
    plan = make_plan(booked_negative() + [_partner_negative()], now=utc(2026, 9, 14),
                     overrides={"routine.partner_negative_skips_routine": True})
    it = item(plan, "routine-dose-1")
    assert it.state == "not-needed" and "it may still be offered after a shared decision with her" in it.reason


def test_targeted_prophylaxis_says_shared_decision_only_where_the_profile_says_so():
    # NICE DG25 (2016), recommendation 1.1 as read: no statement that anti-D is still offered
    # after a negative fetal RHD result (profile routine.targeted_shared_decision = false)
    neg = rec("fetal_rhd", result="negative", sampled_on="2026-06-01")
    plain = item(make_plan(booked_negative() + [neg], now=utc(2026, 9, 14)), "routine-dose-1")
    assert plain.reason == "cell-free fetal RHD negative: routine antenatal anti-D not needed"
    said = item(make_plan(booked_negative() + [neg], now=utc(2026, 9, 14),
                          overrides={"routine.targeted_shared_decision": True}), "routine-dose-1")
    assert said.reason.endswith("it may still be offered after a shared decision with her")


def test_an_event_the_profile_forgoes_says_it_may_still_be_offered():
    # ACOG Clinical Practice Update (2024), as its published summaries state: before 12 weeks anti-D
    # may be forgone after abortion or pregnancy loss, and considered case by case (shared decision)
    e = event("2026-05-03T10:00:00Z", "miscarriage", id="ev1")
    it = item(make_plan(booked_negative() + [e], now=utc(2026, 5, 4), profile="acog-2017-early-2024"), "event-dose")
    assert it.state == "not-needed"
    assert it.reason == ("miscarriage at 9+0: the profile forgoes anti-D for this event in 0+0 to 11+6; it may "
                         "still be offered after a shared decision with the woman")
