"""Events count at the facility's own rate: event doses the engine planned (not "not-needed") for
events recorded at that facility in the 365 days before now."""
from __future__ import annotations

import pytest

from clinic.supply.forecast import event_rate, forecast_products
from tests.supply import dataset as ds


def test_three_events_in_the_last_year():
    r = ds.rate(ds.clinic_a())
    # W2 (12 Apr, 500 IU), W3 (25 Mar, 500 IU), W7 (30 May, 250 IU, still due). Not W1's bleed at
    # 10+0 (not needed), not OLD's event of 1 May 2025 (396 days ago).
    assert (r.count, r.days, r.doses_iu) == (3, 365, (250, 500, 500))
    # 3 events in 365 days = 3 * 7 / 365 = 0.057534 a week
    assert r.per_week == pytest.approx(0.057534, abs=1e-6)


def test_an_event_recorded_at_another_clinic_is_that_clinics():
    pregs = ds.clinic_a()
    p = ds.Preg("X", "2026-09-30")
    p.add("event", facility=ds.B, event_kind="abdominal-trauma", occurred_at="2026-05-10T10:00:00Z")
    pregs["X"] = p
    assert ds.rate(pregs, ds.A).count == 3
    assert ds.rate(pregs, ds.B).count == 1


def test_the_window_is_365_days_before_now():
    pregs = ds.clinic_a()
    plans = [(p.plan(), p.event_places()) for p in pregs.values()]
    # 30 days later W3's event of 25 Mar is still inside; 400 days later nothing is.
    assert event_rate(plans, facility=ds.A, now=ds.NOW.replace(month=7)).count == 3
    assert event_rate(plans, facility=ds.A, now=ds.NOW.replace(year=2027, month=7)).count == 0


def test_events_ahead_are_spread_evenly_at_that_rate():
    pregs = ds.clinic_a()
    fc = forecast_products([], ds.rate(pregs), [ds.V500], start=ds.START, weeks=12)[0]
    # each of the 3 events needs one 500 IU vial (250 IU and 500 IU doses): 3 / 365 vials a day,
    # 3 * 7 / 365 = 0.057534 a week, 3 * 84 / 365 = 0.690411 in the 12 weeks
    assert all(w.event_vials == pytest.approx(0.057534, abs=1e-6) for w in fc.weeks)
    assert fc.events_expected == pytest.approx(0.690411, abs=1e-6)
    assert fc.expected_vials == pytest.approx(0.690411, abs=1e-6)
    assert fc.events_observed == 3 and fc.vials_per_event == 1.0
