"""Fetal haematocrit must lie between 5 % and 75 %.

Plausibility bounds (common practice): a fetal Hct below 5 % is not compatible with life and the
packed donor cells used for intrauterine transfusion are about 75-85 % (from memory), so a fetal
value above 75 % is an entry error.
"""
from __future__ import annotations

import pytest

from clinic.records.validate import ValidationError, validate_record
from tests.records.helpers import NOW, TZ, valid


@pytest.mark.parametrize("hct", [4.9, 0, -3, 75.1, 100, "abc"])
def test_hct_outside_5_to_75_percent_is_refused(hct):
    with pytest.raises(ValidationError) as e:
        validate_record("fbs", valid("fbs", hct_pct=hct), now=NOW, tz=TZ)
    assert "hct_pct" in e.value.errors
    assert "5 to 75" in e.value.errors["hct_pct"]


@pytest.mark.parametrize("hct", [5, 75, "32,5"])
def test_hct_inside_the_range_is_accepted(hct):
    out = validate_record("fbs", valid("fbs", hct_pct=hct), now=NOW, tz=TZ)
    assert 5 <= out["hct_pct"] <= 75


def test_fbs_needs_hb_or_hct():
    with pytest.raises(ValidationError) as e:
        validate_record("fbs", valid("fbs", hct_pct=None), now=NOW, tz=TZ)
    assert "hb_g_dl" in e.value.errors


def test_iut_pre_and_post_hct_use_the_same_range():
    base = {"given_at": "2026-03-10T10:00", "volume_ml": 40, "pre_hct_pct": 80}
    with pytest.raises(ValidationError) as e:
        validate_record("iut", base, now=NOW, tz=TZ)
    assert "pre_hct_pct" in e.value.errors
