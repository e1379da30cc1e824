"""Amendments keep earlier values; stale edits conflict; void keeps the record."""
from __future__ import annotations

import pytest

from clinic.records.validate import ValidationError
from clinic.store import Conflict, NotFound
from tests.conftest import FACILITY_ID, USERNAME


def test_amend_keeps_earlier_values_and_bumps_the_version(store, woman, now):
    rec = store.amend(woman["id"], {"village": "Lower Ridge", "phone": ""}, by="clerk2", reason="moved house",
                      expected_version=1, now=now)
    assert rec["version"] == 2 and rec["village"] == "Lower Ridge" and "phone" not in rec
    assert rec["amended_by"] == "clerk2" and rec["amended_at"] == "2026-03-16T09:30:00Z"
    (am,) = rec["amendments"]
    assert am["reason"] == "moved house" and am["by"] == "clerk2"
    assert am["changes"] == {"phone": {"old": "0700 000 001", "new": None},
                             "village": {"old": "Upper Ridge", "new": "Lower Ridge"}}


def test_amend_with_a_stale_expected_version_is_a_conflict(store, woman, now):
    store.amend(woman["id"], {"village": "A"}, by=USERNAME, reason="first edit", expected_version=1, now=now)
    with pytest.raises(Conflict) as e:
        store.amend(woman["id"], {"village": "B"}, by=USERNAME, reason="second edit, stale", expected_version=1,
                    now=now)
    assert e.value.current_version == 2
    assert store.get(woman["id"])["village"] == "A"


def test_amend_requires_a_reason(store, woman, now):
    for reason in ("", "   ", None):
        with pytest.raises(ValidationError) as e:
            store.amend(woman["id"], {"village": "X"}, by=USERNAME, reason=reason, now=now)
        assert "reason" in e.value.errors
    assert store.get(woman["id"])["version"] == 1


def test_amend_validates_the_merged_record(store, pregnancy, now):
    with pytest.raises(ValidationError) as e:
        store.amend(pregnancy["id"], {"parity": 5}, by=USERNAME, reason="typo", now=now)
    assert "parity" in e.value.errors  # parity must be below gravidity 2
    with pytest.raises(ValidationError) as e:
        store.amend(pregnancy["id"], {"woman_id": "x"}, by=USERNAME, reason="no", now=now)
    assert "woman_id" in e.value.errors  # the envelope cannot be amended


def test_amend_recomputes_the_canonical_dose(store, pregnancy, now):
    dose = store.create("dose", {"given_at": "2026-03-10T10:00", "amount": 250, "unit": "ug", "route": "IM",
                                 "lot": "LOT-9", "lot_expiry": "2027-01-31", "indication": "sensitising-event",
                                 "given_by": "Midwife One"},
                        by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"], now=now).record
    assert dose["dose_iu"] == 1250  # 250 µg x 5 IU/µg (BSH 2014, Qureshi et al., Transfus Med 2014;24:8-20)
    rec = store.amend(dose["id"], {"amount": 300}, by=USERNAME, reason="wrong vial", now=now)
    assert rec["dose_iu"] == 1500 and rec["amendments"][0]["changes"]["dose_iu"] == {"old": 1250, "new": 1500}


def test_amend_of_unknown_record_is_not_found(store, now):
    with pytest.raises(NotFound):
        store.amend("missing", {"village": "X"}, by=USERNAME, reason="r", now=now)


def test_amend_changing_nothing_keeps_the_version(store, woman, now):
    rec = store.amend(woman["id"], {"village": "Upper Ridge"}, by=USERNAME, reason="same", now=now)
    assert rec["version"] == 1 and len(store.audit(woman["id"])) == 1


def test_void_keeps_the_record_with_its_reason(store, woman, now):
    rec = store.void(woman["id"], by=USERNAME, reason="registered twice", now=now)
    assert rec["voided"] is True and rec["version"] == 2 and rec["name"] == "Amina Test Wanjiru"
    assert store.get(woman["id"])["voided_reason"] == "registered twice"
    with pytest.raises(Conflict):
        store.void(woman["id"], by=USERNAME, reason="again", now=now)
    with pytest.raises(ValidationError) as e:
        store.void(woman["id"], by=USERNAME, reason="", now=now)
    assert "reason" in e.value.errors
