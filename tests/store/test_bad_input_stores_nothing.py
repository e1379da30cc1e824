"""Bad input gives field-level errors, and nothing reaches the disk: no record, no index or audit line."""
from __future__ import annotations

import os

import pytest

from clinic.records.validate import ValidationError
from tests.conftest import FACILITY_ID, USERNAME


def _snapshot(data_dir):
    out = {}
    for root, _dirs, files in os.walk(data_dir):
        for f in files:
            p = os.path.join(root, f)
            with open(p, "rb") as fh:
                out[p] = fh.read()
    return out


@pytest.mark.parametrize("kind, fields, bad_field", [
    ("typing", {"abo": "Z", "rhd": "negative", "tested_on": "2026-03-02"}, "abo"),
    ("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-04-30"}, "tested_on"),  # after now
    ("typing", {"abo": "O", "rhd": "negative"}, "tested_on"),
    ("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02", "colour": "red"}, "colour"),
    ("screen", {"sampled_at": "2026-03-02T10:00", "result": "positive", "antibodies": ["anti-D"], "titre": 3}, "titre"),
    ("dose", {"given_at": "2026-03-10T10:00", "amount": 0, "unit": "ug", "route": "IM", "lot": "L",
              "lot_expiry": "2027-01-01", "indication": "routine-antenatal", "given_by": "M"}, "amount"),
])
def test_bad_field_is_named_and_nothing_is_written(store, pregnancy, data_dir, now, kind, fields, bad_field):
    before = _snapshot(data_dir)
    with pytest.raises(ValidationError) as e:
        store.create(kind, fields, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"], now=now)
    assert bad_field in e.value.errors
    assert _snapshot(data_dir) == before
    assert store.entries(pregnancy["id"]) == []


def test_every_bad_field_is_reported_at_once(store, now):
    with pytest.raises(ValidationError) as e:
        store.create("woman", {"name": "", "stated_age": 99}, by="", facility="bad facility", now=now)
    assert {"name", "stated_age", "by", "facility"} <= set(e.value.errors)
    assert "10 to 60" in e.value.errors["stated_age"]


def test_failed_amend_writes_nothing(store, woman, data_dir, now):
    before = _snapshot(data_dir)
    with pytest.raises(ValidationError) as e:
        store.amend(woman["id"], {"stated_age": 5}, by=USERNAME, reason="typo", now=now)
    assert "stated_age" in e.value.errors
    assert _snapshot(data_dir) == before


def test_unknown_kind_is_refused(store, now):
    with pytest.raises(ValidationError) as e:
        store.create("tattoo", {}, by=USERNAME, facility=FACILITY_ID, now=now)
    assert "kind" in e.value.errors
