"""After the birth: cord blood typing and DAT, the postpartum dose within 72 hours when the
baby is RhD positive or not known (BSH 2014 key recommendations, post-delivery: at least 500 IU
within 72 h and an FMH test; ACOG PB 181, 2017, Level A: within 72 hours of delivery), the late window,
and a positive DAT flagged for a clinician instead of withholding the dose."""
from datetime import timedelta
from zoneinfo import ZoneInfo

import pytest

from clinic.care import ga_on
from tests.care.builders import alert_codes, birth, booked_negative, dose, item, make_plan, pregnancy, rec, utc

BORN = utc(2026, 11, 28, 10, 0)


def _with(b, *extra, now=BORN + timedelta(hours=5), profile="bsh-2014", **kw):
    return make_plan(booked_negative() + [b, *extra], now=now, profile=profile, **kw)


def test_baby_positive_dose_due_within_72_hours():
    plan = _with(birth("2026-11-28T10:00:00Z", id="b1"))
    it = item(plan, "postpartum-dose")
    assert it.state == "due" and it.dose_iu == 500        # BSH 2014 key recs: at least 500 IU within 72 h
    assert it.closes == BORN + timedelta(hours=72) and it.late_until == BORN + timedelta(days=10)
    assert it.related_id == "b1"
    assert item(plan, "postpartum-fmh").state == "due"    # BSH 2014 key recs: maternal sample tested for FMH
    assert item(plan, "cord-typing").state == "done"


def test_acog_postpartum_300_ug_and_28_day_late_window():
    # ACOG PB 181 (2017), Level A: within 72 hours of delivery; 300 µg and up to 28 days when 72 h
    # have passed: from memory
    plan = _with(birth("2026-11-28T10:00:00Z"), profile="acog-2017", now=BORN + timedelta(days=27))
    it = item(plan, "postpartum-dose")
    assert (it.state, it.dose_iu, it.dose_ug) == ("overdue", 1500, 300)
    assert it.late_until == BORN + timedelta(days=28)


def test_baby_negative_no_dose():
    plan = _with(birth("2026-11-28T10:00:00Z", baby_rhd="negative"))
    it = item(plan, "postpartum-dose")
    assert it.state == "not-needed" and it.dose_iu is None


@pytest.mark.parametrize("outcome, dat", [("live-birth", "not-done"), ("stillbirth", "not-done")])
def test_baby_not_tested_or_stillbirth_dose_due(outcome, dat):
    plan = _with(birth("2026-11-28T10:00:00Z", baby_rhd="not-tested", outcome=outcome, dat=dat))
    it = item(plan, "postpartum-dose")
    assert it.state == "due" and "not known" in it.reason
    assert item(plan, "cord-typing").state == "due"


def test_positive_dat_does_not_cancel_the_dose():
    # after antenatal anti-D a positive DAT may be passive antibody: flag, do not withhold
    plan = _with(birth("2026-11-28T10:00:00Z", dat="positive"))
    assert item(plan, "postpartum-dose").state == "due"
    assert "baby-dat-positive" in alert_codes(plan)


@pytest.mark.parametrize("after, state, timeliness", [
    (timedelta(hours=72), "done", "on-time"),
    (timedelta(hours=72, minutes=1), "done", "late"),
])
def test_72_hour_boundary(after, state, timeliness):
    d = dose(f"{BORN + after:%Y-%m-%dT%H:%M:%SZ}", 500, indication="postpartum")
    plan = _with(birth("2026-11-28T10:00:00Z"), d, now=BORN + timedelta(days=5))
    it = item(plan, "postpartum-dose")
    assert (it.state, it.timeliness) == (state, timeliness)


@pytest.mark.parametrize("after, state", [
    (timedelta(hours=72), "due"), (timedelta(hours=72, minutes=1), "overdue"),
    (timedelta(days=10), "overdue"), (timedelta(days=10, minutes=1), "missed"),
])
def test_states_after_birth(after, state):
    assert item(_with(birth("2026-11-28T10:00:00Z"), now=BORN + after), "postpartum-dose").state == state


def test_birth_just_before_local_midnight_counts_on_the_local_day():
    # Nairobi is UTC+3: 23:50 local on 28 November is 20:50 UTC the same day; 00:10 local on
    # 29 November is 21:10 UTC on the 28th. GA follows the local day (LMP 2026-03-01).
    tz = ZoneInfo("Africa/Nairobi")
    assert ga_on(utc(2026, 11, 28, 20, 50), lmp="2026-03-01", tz=tz) == 272   # 38+6
    assert ga_on(utc(2026, 11, 28, 21, 10), lmp="2026-03-01", tz=tz) == 273   # 39+0
    assert ga_on(utc(2026, 11, 28, 21, 10), lmp="2026-03-01") == 272          # by UTC it would still be 38+6
    b = birth("2026-11-28T23:50:00", tz=tz)        # entered as local wall-clock time
    assert b["born_at"] == "2026-11-28T20:50:00Z"
    plan = make_plan(booked_negative() + [b], now=utc(2026, 11, 29, 6), tz=tz)
    it = item(plan, "postpartum-dose")
    assert it.closes == utc(2026, 12, 1, 20, 50)   # 72 h, whatever the calendar says


def test_ended_pathway_when_everything_is_done():
    b = birth("2026-11-28T10:00:00Z", id="b1")
    f = rec("fmh", method="kleihauer-betke", sampled_at="2026-11-28T12:00:00Z", fetal_cell_percent=0.01,
            covers_id="b1")
    d = dose("2026-11-28T20:00:00Z", 500, indication="postpartum", covers_id="b1")
    r = [rec("screen", sampled_at="2026-09-13T08:00:00Z", result="negative"),
         dose("2026-09-13T09:00:00Z", 500), dose("2026-10-25T09:00:00Z", 500)]
    plan = make_plan(booked_negative() + r + [b, f, d], now=BORN + timedelta(days=3),
                     preg=pregnancy(status="delivered"))
    assert plan.pathway == "ended"
    assert item(plan, "postpartum-dose").timeliness == "on-time"


def test_large_postpartum_bleed_asks_for_more():
    # 1 % fetal cells x 5000 mL = 50 mL whole blood = 25 mL red cells; BSH 125 IU/mL (from memory)
    # -> 3125 IU; 500 IU given -> 2625 IU more
    b = birth("2026-11-28T10:00:00Z", id="b1")
    f = rec("fmh", method="kleihauer-betke", sampled_at="2026-11-28T11:00:00Z", fetal_cell_percent=1.0,
            covers_id="b1")
    d = dose("2026-11-28T12:00:00Z", 500, indication="postpartum", covers_id="b1")
    plan = _with(b, f, d, now=BORN + timedelta(hours=6))
    extra = item(plan, "postpartum-fmh-dose")
    assert extra.state == "due" and extra.dose_iu == 2625
    assert "fmh-large" in alert_codes(plan)
