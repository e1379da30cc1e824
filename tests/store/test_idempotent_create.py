"""A replayed create (same record_id from a phone's outbox) returns the stored record."""
from __future__ import annotations

import uuid

import pytest

from clinic.store import Conflict
from tests.conftest import FACILITY_ID, USERNAME

TYPING = {"abo": "A", "rhd": "negative", "tested_on": "2026-03-02"}


def test_same_id_same_fields_returns_the_existing_record(store, pregnancy, now):
    rid = str(uuid.uuid4())
    first = store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"],
                         record_id=rid, now=now)
    again = store.create("typing", dict(TYPING), by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"],
                         record_id=rid, now=now)
    assert first.created is True and again.created is False  # the caller need not read it again to know
    assert again.record == first.record
    assert len(store.entries(pregnancy["id"])) == 1
    assert len(store.audit(rid)) == 1


def test_replay_after_an_amendment_still_matches_the_original(store, pregnancy, now):
    rid = str(uuid.uuid4())
    store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"], record_id=rid,
                 now=now)
    store.amend(rid, {"lab": "District lab"}, by=USERNAME, reason="lab added", now=now)
    again = store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"],
                         record_id=rid, now=now)
    assert again.created is False and again.record["version"] == 2


def test_same_id_different_fields_is_a_conflict(store, pregnancy, now):
    rid = str(uuid.uuid4())
    store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"], record_id=rid,
                 now=now)
    with pytest.raises(Conflict) as e:
        store.create("typing", {**TYPING, "rhd": "positive"}, by=USERNAME, facility=FACILITY_ID,
                     pregnancy_id=pregnancy["id"], record_id=rid, now=now)
    assert e.value.current_version == 1
    assert store.get(rid)["rhd"] == "negative"


def test_record_id_must_be_safe_text(store, pregnancy, now):
    from clinic.records.validate import ValidationError

    with pytest.raises(ValidationError) as e:
        store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"],
                     record_id="../../etc passwd", now=now)
    assert "record_id" in e.value.errors
