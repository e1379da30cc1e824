"""Monthly coverage indicators, November 2026, on the invented district of dataset.py.

Every numerator and denominator below is worked out by hand from the cases in dataset.py
(clinic A = "clinic-a", clinic B = "clinic-b"); the eligibility and timing behind each
(windows, 72 h, late windows) are the care engine's, read from its plans.
"""
from __future__ import annotations

import pytest

from clinic.reports.coverage import DISTRICT
from tests.reports import dataset as ds

A, B, D = ds.A, ds.B, DISTRICT


def nd(rep, fac, ind):
    c = rep.cell(fac, ind)
    return c.numerator, c.denominator, c.percentage


# (indicator, clinic A, clinic B, district) as (numerator, denominator, percentage)
HAND_WORKED = [
    # Booked in November: A: P1, P2, P3, M (M moved to B but booked at A: counted once, for A);
    # B: P4. Counts have no denominator.
    ("bookings", (4, None, None), (1, None, None), (5, None, None)),
    # Typed: A: P1, P2, M (P3 never typed) = 3 of 4; B: P4 = 1 of 1; district 4 of 5.
    ("typed_at_booking", (3, 4, 75.0), (1, 1, 100.0), (4, 5, 80.0)),
    # RhD negative among typed: A: P1, M of P1, P2, M = 2/3 = 66.7 %; B: P4 1/1; district 3/4.
    ("rhd_negative_share", (2, 3, 66.7), (1, 1, 100.0), (3, 4, 75.0)),
    # Screened at booking (RhD neg booked): A: P1 and M (screened at B after she moved) = 2/2;
    # B: P4 not screened 0/1; district 2/3 = 66.7 %.
    ("neg_screen_at_booking", (2, 2, 100.0), (0, 1, 0.0), (2, 3, 66.7)),
    # Partner typed: A: P1 only = 1/2; B: 0/1; district 1/3 = 33.3 %.
    ("neg_partner_typed", (1, 2, 50.0), (0, 1, 0.0), (1, 3, 33.3)),
    # Fetal RHD (the bsh-2014 profile uses targeted prophylaxis): nobody tested.
    ("neg_fetal_rhd", (0, 2, 0.0), (0, 1, 0.0), (0, 3, 0.0)),
    # Routine doses whose window closed in November: A: R1 dose 1 (late: 11 Nov, one day after
    # 28+6), R2 dose 1 (on time), R3 dose 1 (none) = 3; B: R4 dose 2 (on time), R5 dose 2
    # (none), R6 dose 1 (on time, window ends with 30 Nov) = 3; district 6.
    ("routine_on_time", (1, 3, 33.3), (2, 3, 66.7), (3, 6, 50.0)),
    ("routine_late", (1, 3, 33.3), (0, 3, 0.0), (1, 6, 16.7)),
    ("routine_not_given", (1, 3, 33.3), (1, 3, 33.3), (2, 6, 33.3)),
    # Both doses, last window closed in November: B: R4 (both) and R5 (one) = 1/2; A: none.
    ("routine_both_doses", (0, 0, None), (1, 2, 50.0), (1, 2, 50.0)),
    # Events in November needing anti-D: B: E1 (dose at 71 h 59 min), E2 (72 h 01 min),
    # E3 (its only dose voided) = 3; A: E4's events are 31 Oct 23:30 and 1 Dec 00:30 local = 0.
    ("event_on_time", (0, 0, None), (1, 3, 33.3), (1, 3, 33.3)),
    ("event_late", (0, 0, None), (1, 3, 33.3), (1, 3, 33.3)),
    ("event_none", (0, 0, None), (1, 3, 33.3), (1, 3, 33.3)),
    # Births to RhD-negative women: A: B1, B2, B5; B: B3, B4.
    ("births_neg", (3, None, None), (2, None, None), (5, None, None)),
    # Cord typed: all but B3 (baby's typing never recorded): A 3/3, B 1/2, district 4/5.
    ("cord_typed", (3, 3, 100.0), (1, 2, 50.0), (4, 5, 80.0)),
    # Postpartum dose needed: A: B1 (71 h 59 min), B2 (72 h 01 min), B5 (after the 10-day
    # window); B: B3 (baby RhD not known, no dose); B4's baby is RhD negative: not eligible.
    ("postpartum_on_time", (1, 3, 33.3), (0, 1, 0.0), (1, 4, 25.0)),
    ("postpartum_late", (1, 3, 33.3), (0, 1, 0.0), (1, 4, 25.0)),
    ("postpartum_missed", (1, 3, 33.3), (1, 1, 100.0), (2, 4, 50.0)),
    # FMH test after birth (profile requires it): only B1 tested: A 1/3, B 0/1, district 1/4.
    ("postpartum_fmh", (1, 3, 33.3), (0, 1, 0.0), (1, 4, 25.0)),
    # New immune anti-D: S1 at B.
    ("new_sensitisations", (0, None, None), (1, None, None), (1, None, None)),
    # Doses given in November (local): A: R1, R2, B1, B2, B5 = 5; B: R4 dose 2, R6, E1, E2 = 4
    # (E3's dose was voided; R4 dose 1, R5 dose 1 and S1's dose were given before November).
    ("antid_doses", (5, None, None), (4, None, None), (9, None, None)),
]


@pytest.mark.parametrize("ind,a,b,d", HAND_WORKED, ids=[h[0] for h in HAND_WORKED])
def test_indicator_matches_hand_worked_numbers(november, ind, a, b, d):
    assert nd(november, A, ind) == a
    assert nd(november, B, ind) == b
    assert nd(november, D, ind) == d


def test_postpartum_dose_at_71h59_is_on_time_and_at_72h01_is_late(november):
    pp = {(f.pregnancy_id, f.outcome) for f in november.follow_up}
    cell = november.cell(A, "postpartum_on_time")
    assert cell.outcomes == {"on-time": 1, "late": 1, "after-window": 1}
    assert (ds.rid("B1/p"), "on-time") not in pp  # on time: not on any follow-up list


def test_event_dose_at_71h59_is_on_time_and_at_72h01_is_late(november):
    assert november.cell(B, "event_on_time").outcomes == {"on-time": 1, "late": 1, "not-given": 1}


def test_routine_dose_one_day_outside_the_window_is_late_not_missed(inputs):
    r1 = next(c for c in inputs.cases if c.id == ds.rid("R1/p"))
    it = r1.item("routine-dose-1")
    assert it.state == "done" and it.timeliness == "late"   # the engine's judgement
    # ... after the amendment: the first entry (10 Nov) would have been on time
    dose = r1.entry(ds.rid("R1/dose1"))
    assert dose["version"] == 2 and dose["amendments"][0]["changes"]["given_at"]["old"] == "2026-11-10T07:00:00Z"


def test_percentage_is_null_not_zero_when_the_denominator_is_zero(november):
    c = november.cell(A, "event_on_time")
    assert (c.numerator, c.denominator, c.percentage) == (0, 0, None)


def test_moved_woman_is_one_woman_one_pregnancy_counted_for_her_booking_clinic(inputs, november):
    moved = [c for c in inputs.cases if c.woman["id"] == ds.rid("M/w")]
    assert len(moved) == 1
    assert moved[0].facility == A and moved[0].last_facility == B


def test_follow_up_lists_who_was_missed(november):
    got = sorted((f.facility, f.indicator, f.pregnancy_id) for f in november.follow_up)
    want = sorted([
        (A, "typed_at_booking", ds.rid("P3/p")),
        (B, "neg_screen_at_booking", ds.rid("P4/p")),
        (A, "routine_not_given", ds.rid("R3/p")),
        (B, "routine_not_given", ds.rid("R5/p")),
        (B, "event_none", ds.rid("E3/p")),
        (B, "cord_typed", ds.rid("B3/p")),
        (B, "postpartum_missed", ds.rid("B3/p")),
        (A, "postpartum_fmh", ds.rid("B2/p")),
        (A, "postpartum_fmh", ds.rid("B5/p")),
        (B, "postpartum_fmh", ds.rid("B3/p")),
    ])
    assert got == want


def test_new_sensitisation_is_listed_with_its_prior_prophylaxis(november):
    (s,) = november.sensitisations
    assert s.pregnancy_id == ds.rid("S1/p") and s.facility == B
    assert s.detail["titre"] == 16
    assert [d["indication"] for d in s.detail["doses_before"]] == ["sensitising-event"]
    assert "2024" in s.detail["prior_anti_d"]


def test_anti_d_use_by_indication_and_lot(november):
    use = {(u.facility, u.by, u.key): (u.doses, u.iu) for u in november.usage}
    # A: routine R1, R2 (2 x 500 IU); postpartum B1, B2, B5 (3 x 500 IU)
    assert use[(A, "indication", "routine-antenatal")] == (2, 1000)
    assert use[(A, "indication", "postpartum")] == (3, 1500)
    # B: routine R4 dose 2, R6; events E1 (entered as 100 µg = 500 IU), E2
    assert use[(B, "indication", "routine-antenatal")] == (2, 1000)
    assert use[(B, "indication", "sensitising-event")] == (2, 1000)
    assert use[(D, "lot", "clinic-a-LOT-1")] == (5, 2500)
    assert use[(D, "lot", "clinic-b-LOT-1")] == (4, 2000)


def test_stock_on_hand_and_lots_expiring_within_60_days(november):
    lots = {(b.facility, b.lot): b for b in november.stock}
    a1 = lots[(A, "A-LOT-1")]
    # 20 received - 2 cold-chain break - 5 given = 13 (the 50 received on 1 Dec come after the month)
    assert (a1.vials, a1.expires_soon, a1.expired) == (13, False, False)
    # A-LOT-2 expires 15 Jan 2027: 46 days after 30 Nov, inside 60 days
    assert (lots[(A, "A-LOT-2")].vials, lots[(A, "A-LOT-2")].expires_soon) == (10, True)
    # B-LOT-1 expired 20 Nov with 6 - 3 = 3 vials on the shelf
    assert (lots[(B, "B-LOT-1")].vials, lots[(B, "B-LOT-1")].expired) == (3, True)


def test_trend_has_twelve_months_ending_with_the_report_month(trend, november):
    months = sorted(trend)
    assert [str(m) for m in (months[0], months[-1])] == ["2025-12", "2026-11"]
    assert trend[months[-1]].cell(D, "routine_on_time").numerator == november.cell(D, "routine_on_time").numerator
    # October: S1's event dose (3 Oct) and R5's dose 1 (13 Oct) were given then
    assert trend[months[-2]].cell(B, "antid_doses").numerator >= 2


def test_plans_made_in_several_processes_give_the_same_report(truth_store, november):
    from clinic.reports.cases import load_inputs
    from clinic.reports.coverage import INDICATORS, compute_month
    from tests.reports.conftest import NOVEMBER

    inp = load_inputs(truth_store, truth_store.settings, now=ds.NOW, first_month=NOVEMBER, workers=2)
    rep = compute_month(inp.cases, NOVEMBER, ds.TZ, now=ds.NOW, stock_records=inp.stock, facilities=inp.facilities)
    for f in rep.columns:
        for i in INDICATORS:
            assert (rep.cell(f, i.id).numerator, rep.cell(f, i.id).denominator) == \
                (november.cell(f, i.id).numerator, november.cell(f, i.id).denominator)
