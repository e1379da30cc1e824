"""What looks wrong: every alert the engine raises, each from a recorded history."""
from datetime import timedelta

from tests.care.builders import P1500, alert_codes, booked_negative, dose, event, item, make_plan, screen, typing, utc

SCREEN_28 = screen("2026-09-13T08:00:00Z")


def test_anti_d_for_an_rhd_positive_woman():
    plan = make_plan([typing("positive"), dose("2026-09-13T09:00:00Z", 1500)], now=utc(2026, 9, 14))
    a = [x for x in plan.alerts if x.code == "dose-rhd-positive"]
    assert a and a[0].severity == "danger"


def test_dose_after_immune_sensitisation():
    s = screen("2026-08-01T09:00:00Z", "positive", antibodies=["anti-D"], anti_d_origin="immune", titre=16,
               titre_antibody="anti-D")
    plan = make_plan(booked_negative() + [s, SCREEN_28, dose("2026-09-13T09:00:00Z", 500)], now=utc(2026, 9, 14))
    assert "dose-after-sensitisation" in alert_codes(plan)


def test_routine_dose_before_the_screen_sample():
    plan = make_plan(booked_negative() + [dose("2026-09-13T09:00:00Z", 500)], now=utc(2026, 9, 14))
    assert "routine-before-screen" in alert_codes(plan)


def test_lot_expired_on_the_day_given():
    ok = make_plan(booked_negative() + [SCREEN_28, dose("2026-09-13T09:00:00Z", 500, lot_expiry="2026-09-13")],
                   now=utc(2026, 9, 14))
    assert "lot-expired" not in alert_codes(ok)      # expires at the end of its expiry day
    bad = make_plan(booked_negative() + [SCREEN_28, dose("2026-09-13T09:00:00Z", 500, lot_expiry="2026-09-12")],
                    now=utc(2026, 9, 14))
    assert "lot-expired" in alert_codes(bad)


def test_dose_above_what_the_profile_allows():
    # BSH routine 500 IU; a whole 1500 IU vial is allowed when only 1500 IU vials are stocked
    fine = make_plan(booked_negative() + [SCREEN_28, dose("2026-09-13T09:00:00Z", 1500)], now=utc(2026, 9, 14),
                     products=(P1500,))
    assert "dose-above-allowed" not in alert_codes(fine)
    big = make_plan(booked_negative() + [SCREEN_28, dose("2026-09-13T09:00:00Z", 5000)], now=utc(2026, 9, 14),
                    products=(P1500,))
    assert "dose-above-allowed" in alert_codes(big)


def test_same_administration_recorded_twice_counts_once():
    a = dose("2026-09-13T09:00:00Z", 500, lot="LOT7")
    b = dose("2026-09-13T09:05:00Z", 500, lot="LOT7")
    plan = make_plan(booked_negative() + [SCREEN_28, a, b], now=utc(2026, 10, 26))
    dup = [x for x in plan.alerts if x.code == "duplicate-dose"]
    assert dup and set(dup[0].record_ids) == {a["id"], b["id"]}
    assert item(plan, "routine-dose-2").state == "due"      # the duplicate is not taken as dose 2


def test_event_with_no_dose_after_its_deadline():
    e = event("2026-08-01T10:00:00Z", "abdominal-trauma", id="ev9")
    plan = make_plan(booked_negative() + [e], now=utc(2026, 8, 1, 10) + timedelta(hours=73))
    a = [x for x in plan.alerts if x.code == "event-dose-overdue"]
    assert a and a[0].severity == "danger" and a[0].record_ids == ["ev9"]


def test_dose_less_than_required():
    e = event("2026-08-01T10:00:00Z", "abdominal-trauma", id="ev9")
    d = dose("2026-08-01T12:00:00Z", 250, indication="sensitising-event", covers_id="ev9")
    plan = make_plan(booked_negative() + [e, d], now=utc(2026, 8, 2))
    assert "dose-below-required" in alert_codes(plan)   # 21+6: minimum 500 IU after 20 weeks (BSH 2014 key recs)


def test_voided_records_do_not_count():
    d = dose("2026-09-13T09:00:00Z", 500)
    d["voided"] = True
    plan = make_plan(booked_negative() + [SCREEN_28, d], now=utc(2026, 9, 14))
    assert item(plan, "routine-dose-1").state == "due"


def test_postpartum_dose_recorded_without_a_birth_is_flagged():
    plan = make_plan(booked_negative() + [dose("2026-11-30T09:00:00Z", 500, indication="postpartum")],
                     now=utc(2026, 12, 1))
    assert "postpartum-dose-without-birth" in alert_codes(plan)
