"""RhD status for management. Weak D types 1, 2 and 3 are managed as RhD positive; other or
untyped weak D as RhD negative until genotyped; partial D as RhD negative; inconclusive ->
retest (Sandler SG et al., Transfusion 2015;55:680-689; BSH 2016, White et al.; from memory)."""
import pytest

from tests.care.builders import alert_codes, booked_negative, item, make_plan, screen, typing, utc

S = screen("2026-05-01T09:00:00Z")


@pytest.mark.parametrize("rhd, extra, managed, pathway", [
    ("positive", {}, "positive", "not-needed"),
    ("negative", {}, "negative", "prophylaxis"),
    ("weak-d", {"weak_d_type": "1"}, "positive", "not-needed"),
    ("weak-d", {"weak_d_type": "2"}, "positive", "not-needed"),
    ("weak-d", {"weak_d_type": "3"}, "positive", "not-needed"),
    ("weak-d", {"weak_d_type": "4.0"}, "negative", "prophylaxis"),
    ("weak-d", {}, "negative", "prophylaxis"),
    ("partial-d", {"partial_d_category": "DVI"}, "negative", "prophylaxis"),
    ("inconclusive", {}, "retest", "retest"),
])
def test_managed_as(rhd, extra, managed, pathway):
    plan = make_plan([typing(rhd, **extra), S], now=utc(2026, 6, 1))
    assert plan.rhd["managed_as"] == managed and plan.pathway == pathway


def test_untyped_woman():
    plan = make_plan([S], now=utc(2026, 5, 10))
    assert plan.rhd["managed_as"] == "untyped" and plan.pathway == "untyped"
    assert item(plan, "booking-typing").state == "due"


def test_untyped_weak_d_asks_for_genotyping():
    plan = make_plan([typing("weak-d"), S], now=utc(2026, 6, 1))
    assert "weak-d-genotype" in alert_codes(plan)


def test_rhd_positive_has_no_prophylaxis_items_due():
    plan = make_plan([typing("positive"), S], now=utc(2026, 9, 14))
    assert all(i.state == "not-needed" for i in plan.items if i.category in ("routine", "event", "postpartum"))


def test_discordant_typings_are_flagged():
    plan = make_plan([typing("positive", tested_on="2026-05-01"), typing("negative", tested_on="2026-05-08"), S],
                     now=utc(2026, 6, 1))
    assert "typing-discordant" in alert_codes(plan)
    assert plan.rhd["managed_as"] == "negative"   # the most recent typing


def test_booking_items_late_after_the_profile_window():
    # common practice: typing and screen within 14 days of booking (2026-05-01)
    plan = make_plan([], now=utc(2026, 5, 16, 0, 1))
    assert item(plan, "booking-typing").state == "overdue"
    plan = make_plan(booked_negative(), now=utc(2026, 5, 16))
    assert item(plan, "booking-typing").timeliness == "on-time"
