"""Bad input to the engine: a clear error naming the field, never a silent fallback."""
from datetime import datetime

import pytest

from clinic.care import CareInputError, load_profile, plan_pregnancy
from tests.care.builders import booked_negative, dose, make_plan, utc, woman


def test_naive_now_is_refused():
    with pytest.raises(CareInputError) as e:
        plan_pregnancy(woman(), {"booked_on": "2026-05-01", "lmp": "2026-03-01", "status": "ongoing"}, [],
                       now=datetime(2026, 9, 1), profile=load_profile("bsh-2014"))
    assert "now" in e.value.errors


def test_pregnancy_without_dating_names_the_field():
    with pytest.raises(CareInputError) as e:
        make_plan([], preg={"id": "p1", "booked_on": "2026-05-01", "status": "ongoing"}, now=utc(2026, 6, 1))
    assert "pregnancy.lmp" in e.value.errors


def test_entry_missing_a_required_field_names_it():
    d = dose("2026-09-13T09:00:00Z", 500)
    del d["given_at"]
    with pytest.raises(CareInputError) as e:
        make_plan(booked_negative() + [d], now=utc(2026, 9, 14))
    assert "dose.given_at" in e.value.errors


def test_entries_dated_after_now_are_counted_with_a_clock_warning():
    # Issue 16: a dose recorded is a dose given, whatever the clock says (skipping it when the
    # clock runs behind would show it as still to give); the plan warns about the clock.
    plan = make_plan(booked_negative() + [dose("2026-09-14T09:00:00Z", 500)], now=utc(2026, 9, 13, 12))
    assert plan.item("routine-dose-1").state == "done"
    assert "clock-behind" in {a.code for a in plan.alerts}
