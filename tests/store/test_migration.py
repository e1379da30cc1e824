"""The store brings old records up to the current schema at start-up, after a safety backup."""
from __future__ import annotations

import json

import pytest

from clinic.records import schema
from clinic.store import Store, StoreError, migrate
from clinic.store.backup import list_backups
from tests.conftest import FACILITY_ID


@pytest.fixture
def version_2(monkeypatch):
    """Pretend the code is at schema 2, with a step 1 -> 2 that renames village to settlement."""
    def step(record):
        if record["kind"] == "woman" and "village" in record:
            record["settlement"] = record.pop("village")
        return record
    monkeypatch.setattr(schema, "SCHEMA_VERSION", 2)
    monkeypatch.setitem(migrate.MIGRATIONS, 1, step)


def _raw_woman(data_dir, woman_id):
    (part,) = (data_dir / "records" / FACILITY_ID).glob("*.json")
    docs = json.loads(part.read_text())["records"].values()
    return next(d for d in docs if d["id"] == woman_id)


def test_migration_runs_at_start_up(data_dir, store, woman, version_2):
    Store(data_dir)
    raw = _raw_woman(data_dir, woman["id"])
    assert raw["schema"] == 2 and raw["settlement"] == "Upper Ridge" and "village" not in raw
    assert json.loads((data_dir / "records" / "store.json").read_text())["schema"] == 2
    assert [p for p in list_backups(data_dir) if "premigrate" in p.name]


def test_migration_is_not_applied_twice(data_dir, store, woman, version_2, monkeypatch):
    Store(data_dir)
    calls = []
    monkeypatch.setitem(migrate.MIGRATIONS, 1, lambda r: calls.append(r) or r)
    Store(data_dir)
    assert calls == []


def test_an_interrupted_migration_resumes_per_record(data_dir, store, woman, version_2):
    # The version file still says 1 but the record already moved on (a crash between the two).
    raw = _raw_woman(data_dir, woman["id"])
    assert raw["schema"] == 1
    Store(data_dir)
    meta = data_dir / "records" / "store.json"
    meta.write_text(json.dumps({"schema": 1}))
    Store(data_dir)
    assert _raw_woman(data_dir, woman["id"])["settlement"] == "Upper Ridge"


def test_store_newer_than_the_code_is_refused(data_dir, store):
    (data_dir / "records" / "store.json").write_text(json.dumps({"schema": 99}))
    with pytest.raises(StoreError, match="schema version 99"):
        Store(data_dir)


def test_missing_migration_step_is_refused(data_dir, store, monkeypatch):
    monkeypatch.setattr(schema, "SCHEMA_VERSION", 3)
    monkeypatch.setitem(migrate.MIGRATIONS, 1, lambda r: r)
    monkeypatch.delitem(migrate.MIGRATIONS, 2, raising=False)
    with pytest.raises(StoreError, match="no migration registered from schema version 2"):
        Store(data_dir)


def test_imported_old_records_are_migrated_too(store, version_2):
    store.merge_foreign({"id": "old-1", "kind": "woman", "facility": "far", "woman_id": None, "pregnancy_id": None,
                         "created_at": "2026-03-01T08:00:00Z", "created_by": "x", "amended_at": None,
                         "amended_by": None, "version": 1, "amendments": [], "origin": None, "schema": 1,
                         "name": "Old Format", "stated_age": 30})
    assert store.get("old-1")["schema"] == 2
