"""Dates and times of things that happened cannot be in the future (a small clock skew allowed)."""
from __future__ import annotations

import pytest

from clinic.records.validate import ValidationError, validate_record
from tests.records.helpers import NOW, TZ, valid


def test_future_date_is_refused_naming_the_field():
    with pytest.raises(ValidationError) as e:
        validate_record("typing", valid("typing", tested_on="2026-03-17"), now=NOW, tz=TZ)
    assert "tested_on" in e.value.errors and "future" in e.value.errors["tested_on"]


def test_today_in_the_facility_zone_is_allowed():
    # 09:30 UTC is 12:30 in Nairobi (UTC+3), still 16 March.
    assert (
        validate_record("typing", valid("typing", tested_on="2026-03-16"), now=NOW, tz=TZ)["tested_on"] == "2026-03-16"
    )


def test_future_datetime_is_refused_beyond_ten_minutes_of_skew():
    # Local 12:45 is 15 min after now: refused. Local 12:39 is within the 10-minute skew: allowed.
    # (The 10-minute allowance for a phone clock running ahead is common practice, not a published rule.)
    with pytest.raises(ValidationError) as e:
        validate_record("event", valid("event", occurred_at="2026-03-16T12:45"), now=NOW, tz=TZ)
    assert "occurred_at" in e.value.errors
    assert (
        validate_record("event", valid("event", occurred_at="2026-03-16T12:39"), now=NOW, tz=TZ)["occurred_at"]
        == "2026-03-16T09:39:00Z"
    )


def test_naive_time_is_local_and_stored_in_utc():
    out = validate_record("dose", valid("dose", given_at="2026-03-10 10:00"), now=NOW, tz=TZ)
    assert out["given_at"] == "2026-03-10T07:00:00Z"  # Africa/Nairobi is UTC+3 all year (IANA tz database)


def test_expiry_date_may_be_in_the_future():
    assert validate_record("dose", valid("dose"), now=NOW, tz=TZ)["lot_expiry"] == "2027-05-31"


def test_text_after_a_date_is_refused():
    with pytest.raises(ValidationError) as e:
        validate_record("typing", valid("typing", tested_on="2026-03-02junk"), now=NOW, tz=TZ)
    assert "tested_on" in e.value.errors


def test_now_must_be_timezone_aware():
    with pytest.raises(ValueError, match="timezone-aware"):
        validate_record("typing", valid("typing"), now=NOW.replace(tzinfo=None), tz=TZ)
