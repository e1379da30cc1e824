"""[supply] in config.toml: horizon, lead time, transfer time and percentile, with range checks
and errors that name the key and the allowed range."""
from __future__ import annotations

import pytest

from clinic.config import ConfigError, SupplySettings, parse_settings

BASE = {"facility": {"id": "clinic-x", "timezone": "UTC"}}


def _parse(supply):
    return parse_settings({**BASE, "supply": supply}, "config.toml").supply


def test_defaults():
    s = parse_settings(dict(BASE)).supply
    assert s == SupplySettings()
    assert (s.horizon_weeks, s.lead_time_days, s.transfer_days, s.upper_percentile) == (12, 14, 3, 90)


def test_values_are_read():
    s = _parse({"horizon_weeks": 8, "lead_time_days": 21, "transfer_days": 2, "upper_percentile": 95,
                "facility_lead_time_days": {"far-clinic": 35}})
    assert (s.horizon_weeks, s.lead_time_days, s.transfer_days, s.upper_percentile) == (8, 21, 2, 95)
    assert s.lead_time_for("far-clinic") == 35 and s.lead_time_for("near-clinic") == 21


@pytest.mark.parametrize("key, value, words", [
    ("horizon_weeks", 0, "from 1 to 52"), ("horizon_weeks", 53, "from 1 to 52"),
    ("horizon_weeks", "12", "from 1 to 52"),
    ("lead_time_days", -1, "from 0 to 180"), ("lead_time_days", 181, "from 0 to 180"),
    ("transfer_days", 61, "from 0 to 60"), ("transfer_days", 1.5, "from 0 to 60"),
    ("upper_percentile", 100, "from 50 to 99"), ("upper_percentile", 49, "from 50 to 99"),
    ("upper_percentile", True, "from 50 to 99"),
])
def test_out_of_range_names_the_key_and_range(key, value, words):
    with pytest.raises(ConfigError) as e:
        _parse({key: value})
    assert f"supply.{key}" in str(e.value) and words in str(e.value) and "config.toml" in str(e.value)


def test_a_facility_lead_time_out_of_range():
    with pytest.raises(ConfigError) as e:
        _parse({"facility_lead_time_days": {"far-clinic": 400}})
    assert "supply.facility_lead_time_days.far-clinic" in str(e.value) and "from 0 to 180" in str(e.value)


def test_an_unknown_key_is_refused():
    with pytest.raises(ConfigError) as e:
        _parse({"horizon": 12})
    assert "supply.horizon" in str(e.value) and "horizon_weeks" in str(e.value)
