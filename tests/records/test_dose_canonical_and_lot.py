"""Anti-D doses: a positive amount, a lot number, and canonical IU with 1 µg = 5 IU.

1 µg = 5 IU: BSH 2014 guideline, Qureshi et al., Transfusion Medicine 2014;24:8-20.
"""
from __future__ import annotations

import pytest

from clinic.records.validate import ValidationError, validate_record
from tests.records.helpers import NOW, TZ, valid


@pytest.mark.parametrize("amount", [0, -250, "-1", "0.0"])
def test_non_positive_dose_is_refused(amount):
    with pytest.raises(ValidationError) as e:
        validate_record("dose", valid("dose", amount=amount, unit="ug"), now=NOW, tz=TZ)
    assert "amount" in e.value.errors
    assert "above 0" in e.value.errors["amount"]


def test_dose_below_one_iu_is_refused():
    # 0.1 µg x 5 = 0.5 IU (BSH 2014, Qureshi et al., Transfus Med 2014;24:8-20): below the 1 IU minimum.
    with pytest.raises(ValidationError) as e:
        validate_record("dose", valid("dose", amount=0.1, unit="ug"), now=NOW, tz=TZ)
    assert "amount" in e.value.errors


@pytest.mark.parametrize("lot", [None, "", "   "])
def test_administration_without_a_lot_number_is_refused(lot):
    with pytest.raises(ValidationError) as e:
        validate_record("dose", valid("dose", lot=lot), now=NOW, tz=TZ)
    assert e.value.errors.get("lot") == "is required"


def test_administration_without_lot_expiry_is_refused():
    with pytest.raises(ValidationError) as e:
        validate_record("dose", valid("dose", lot_expiry=None), now=NOW, tz=TZ)
    assert "lot_expiry" in e.value.errors


@pytest.mark.parametrize("amount, unit, iu", [
    (1, "ug", 5),        # 1 µg = 5 IU (BSH 2014, Qureshi et al., Transfus Med 2014;24:8-20)
    (300, "ug", 1500),   # 300 µg = 1500 IU (same source)
    (250, "ug", 1250),   # 250 µg = 1250 IU (same source)
    (100, "ug", 500),    # 100 µg = 500 IU (same source)
    (1500, "IU", 1500),  # IU entered stays IU
    (625, "IU", 625),
])
def test_canonical_dose_is_whole_iu_with_5_iu_per_ug(amount, unit, iu):
    out = validate_record("dose", valid("dose", amount=amount, unit=unit), now=NOW, tz=TZ)
    assert out["dose_iu"] == iu
    assert out["amount"] == amount and out["unit"] == unit  # what was entered is kept beside it


def test_unknown_unit_is_refused():
    with pytest.raises(ValidationError) as e:
        validate_record("dose", valid("dose", unit="mg"), now=NOW, tz=TZ)
    assert "unit" in e.value.errors and "ug, IU" in e.value.errors["unit"]
