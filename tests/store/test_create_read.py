"""Creating and reading records: the envelope, parents, and the read calls the other layers use."""
from __future__ import annotations

import pytest

from clinic.records.schema import ENVELOPE_FIELDS, SCHEMA_VERSION
from clinic.records.validate import ValidationError
from clinic.store import NotFound, Store
from tests.conftest import FACILITY_ID, USERNAME

TYPING = {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02", "method": "tube"}


def test_create_sets_the_whole_envelope(store, pregnancy, now):
    rec = store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"],
                       now=now).record
    assert set(ENVELOPE_FIELDS) <= set(rec)
    assert rec["kind"] == "typing" and rec["facility"] == FACILITY_ID
    assert rec["version"] == 1 and rec["amendments"] == [] and rec["voided"] is False
    assert rec["created_at"] == "2026-03-16T09:30:00Z" and rec["created_by"] == USERNAME
    assert rec["schema"] == SCHEMA_VERSION
    assert rec["rhd"] == "negative"


def test_entry_takes_woman_id_from_its_pregnancy(store, woman, pregnancy, now):
    rec = store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"],
                       now=now).record
    assert rec["woman_id"] == woman["id"] and rec["pregnancy_id"] == pregnancy["id"]


def test_entry_with_another_womans_id_is_refused(store, pregnancy, now):
    other = store.create("woman", {"name": "Other Person", "stated_age": 30}, by=USERNAME, facility=FACILITY_ID,
                         now=now).record
    with pytest.raises(ValidationError) as e:
        store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"],
                     woman_id=other["id"], now=now)
    assert "woman_id" in e.value.errors


def test_pregnancy_needs_an_existing_woman(store, now):
    with pytest.raises(NotFound, match="woman nobody does not exist"):
        store.create("pregnancy", {"booked_on": "2026-03-02", "lmp": "2025-12-15", "status": "ongoing"},
                     by=USERNAME, facility=FACILITY_ID, woman_id="nobody", now=now)
    with pytest.raises(ValidationError) as e:
        store.create("pregnancy", {"booked_on": "2026-03-02", "lmp": "2025-12-15", "status": "ongoing"},
                     by=USERNAME, facility=FACILITY_ID, now=now)
    assert "woman_id" in e.value.errors


def test_entry_needs_an_existing_pregnancy(store, woman, now):
    with pytest.raises(NotFound, match="pregnancy"):
        store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=woman["id"], now=now)


def test_stock_record_needs_only_a_facility(store, now):
    rec = store.create("stock", {"move": "received", "at": "2026-03-10T08:00", "product": "Anti-D 1500 IU",
                                 "vial_iu": 1500, "lot": "LOT-A1", "lot_expiry": "2027-06-30", "vials": 10},
                       by=USERNAME, facility=FACILITY_ID, now=now).record
    assert rec["woman_id"] is None and rec["pregnancy_id"] is None
    assert [r["id"] for r in store.iter_records(kind="stock")] == [rec["id"]]


def test_history_returns_woman_pregnancy_and_entries(store, woman, pregnancy, now):
    t = store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"], now=now).record
    w, p, entries = store.history(pregnancy["id"])
    assert w["id"] == woman["id"] and p["id"] == pregnancy["id"] and [e["id"] for e in entries] == [t["id"]]
    with pytest.raises(NotFound):
        store.history("no-such-pregnancy")


def test_entries_include_voided_ones_flagged(store, pregnancy, now):
    t = store.create("typing", TYPING, by=USERNAME, facility=FACILITY_ID, pregnancy_id=pregnancy["id"], now=now).record
    store.void(t["id"], by=USERNAME, reason="entered on the wrong woman", now=now)
    (e,) = store.entries(pregnancy["id"])
    assert e["voided"] is True and e["voided_reason"] == "entered on the wrong woman"


def test_pregnancies_filter_by_facility_and_status(store, pregnancy):
    assert [p["id"] for p in store.pregnancies()] == [pregnancy["id"]]
    assert [p["id"] for p in store.pregnancies(facility=FACILITY_ID, status="ongoing")] == [pregnancy["id"]]
    assert store.pregnancies(status="delivered") == []
    assert store.pregnancies(facility="elsewhere") == []


def test_women_of_facility(store, woman):
    assert [w["id"] for w in store.women_of(FACILITY_ID)] == [woman["id"]]
    assert store.women_of("elsewhere") == []


def test_returned_records_are_copies(store, woman):
    got = store.get(woman["id"])
    got["name"] = "changed by a caller"
    got["amendments"].append("x")
    assert store.get(woman["id"])["name"] == "Amina Test Wanjiru"
    assert store.get(woman["id"])["amendments"] == []


def test_a_second_store_on_the_same_directory_sees_the_records(data_dir, store, pregnancy):
    other = Store(data_dir)
    assert other.get(pregnancy["id"])["booked_on"] == "2026-03-02"
    assert store.get("unknown") is None


def test_iter_records_since_uses_latest_change(store, woman, now):
    from datetime import timedelta

    later = now + timedelta(days=2)
    store.amend(woman["id"], {"village": "Lower Ridge"}, by=USERNAME, reason="moved", now=later)
    assert [r["id"] for r in store.iter_records(since="2026-03-17T00:00:00Z")] == [woman["id"]]
    assert list(store.iter_records(since="2026-03-19T00:00:00Z")) == []
    assert [r["id"] for r in store.iter_records(facility=FACILITY_ID)] == [woman["id"]]
