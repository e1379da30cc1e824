"""The id -> partition index log: appended once per record, read incrementally, torn tails ignored."""
from __future__ import annotations

from clinic.store import Store
from tests.conftest import FACILITY_ID, USERNAME


def test_one_index_line_per_new_record(store, data_dir, woman, pregnancy, now):
    lines = (data_dir / "records" / "index.log").read_text().splitlines()
    assert lines == [f"{woman['id']} {FACILITY_ID}/2026-03 woman - -",
                     f"{pregnancy['id']} {FACILITY_ID}/2026-03 pregnancy {woman['id']} -"]
    store.amend(woman["id"], {"village": "X"}, by=USERNAME, reason="r", now=now)
    assert len((data_dir / "records" / "index.log").read_text().splitlines()) == 2


def test_another_stores_appends_are_seen(data_dir, store, now):
    other = Store(data_dir)
    w = other.create("woman", {"name": "Seen Elsewhere", "stated_age": 25}, by=USERNAME, facility=FACILITY_ID,
                     now=now).record
    assert store.get(w["id"])["name"] == "Seen Elsewhere"


def test_a_torn_last_index_line_is_ignored_then_trimmed(data_dir, store, woman, now):
    index = data_dir / "records" / "index.log"
    with open(index, "ab") as fh:
        fh.write(b"half-written-id test-cl")
    s = Store(data_dir)
    assert s.get(woman["id"]) is not None
    w = s.create("woman", {"name": "After Tear", "stated_age": 25}, by=USERNAME, facility=FACILITY_ID, now=now).record
    assert b"half-written" not in index.read_bytes()
    assert Store(data_dir).get(w["id"]) is not None


def test_an_index_line_without_its_record_reads_as_absent_and_a_retry_fills_it(data_dir, store, pregnancy, now):
    # A crash after the index append but before the partition write.
    index = data_dir / "records" / "index.log"
    with open(index, "ab") as fh:
        fh.write(f"lost-1 {FACILITY_ID}/2026-03 typing {pregnancy['woman_id']} {pregnancy['id']}\n".encode())
    s = Store(data_dir)
    assert s.get("lost-1") is None and s.entries(pregnancy["id"]) == []
    assert s.check().ok
    s.create("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02"}, by=USERNAME,
             facility=FACILITY_ID, pregnancy_id=pregnancy["id"], record_id="lost-1", now=now)
    assert [e["id"] for e in Store(data_dir).entries(pregnancy["id"])] == ["lost-1"]
