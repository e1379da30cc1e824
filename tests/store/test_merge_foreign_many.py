"""Bulk import: merge_foreign_many gives exactly what merge_foreign record by record gives,
validates everything before writing anything, audits every change and rewrites each
partition once."""
from __future__ import annotations

import json
import os
import random
import signal
import subprocess
import sys
import time
from collections import Counter
from datetime import timedelta
from pathlib import Path

import pytest

from clinic.records.validate import ValidationError
from clinic.store import Conflict, Store
from tests.conftest import NOW, USERNAME, write_config
from tests.store.foreign import copy_at, mixed_batch, world


def _tree(data_dir) -> dict[str, bytes]:
    """Every store file (records, index, audit) byte for byte, hidden housekeeping left out."""
    return {p.relative_to(data_dir).as_posix(): p.read_bytes()
            for d in ("records", "audit") for p in sorted((data_dir / d).rglob("*"))
            if p.is_file() and not p.name.startswith(".")}


def _all_files(data_dir) -> dict[str, bytes]:
    return {p.relative_to(data_dir).as_posix(): p.read_bytes()
            for p in sorted(data_dir.rglob("*")) if p.is_file()}


def _twin_stores(tmp_path, password_hash, rng, women=10):
    """Two stores with the same earlier imports and local amendments, and a batch for both."""
    records = world(rng, women)
    earlier = mixed_batch(rng, rng.sample(records, len(records) // 2), copies=(1, 1))
    stores = []
    for name in ("one-by-one", "batch"):
        d = tmp_path / name
        write_config(d, password_hash)
        s = Store(d)
        for rec in earlier:
            s.merge_foreign(rec, now=NOW)
        stores.append(s)
    # A local amendment newer than some imports (kept-local) on both.
    for rec in earlier[:3]:
        for s in stores:
            cur = s.get(rec["id"])
            if cur["version"] < 5:
                field = {"woman": "village", "pregnancy": "prior_anti_d", "typing": "lab",
                         "referral": "reason"}[cur["kind"]]
                for _ in range(5 - cur["version"]):
                    s.amend(rec["id"], {field: f"local {s.get(rec['id'])['version']}"}, by=USERNAME,
                            reason="corrected here", now=NOW)
    return stores, mixed_batch(rng, records)


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 2, 3, 4, 5, 6])
def test_batch_equals_merge_foreign_record_by_record(tmp_path, password_hash, seed):
    rng = random.Random(seed)
    (single, bulk), batch = _twin_stores(tmp_path, password_hash, rng)
    expected = [single.merge_foreign(dict(r), now=NOW) for r in batch]
    got = bulk.merge_foreign_many([dict(r) for r in batch], now=NOW)
    assert got == expected
    # The mix exercised every outcome (else the seed tests less than it claims).
    assert set(expected) == {"created", "updated", "unchanged", "kept-local"}
    # Same partitions, same index, same audit lines: byte for byte.
    assert _tree(bulk.data_dir) == _tree(single.data_dir)
    assert Store(bulk.data_dir).check(now=NOW).ok


def test_entries_before_their_pregnancy_land_where_one_by_one_puts_them(tmp_path, password_hash):
    rng = random.Random(11)
    records = world(rng, 4)
    children_first = sorted(records, key=lambda r: {"woman": 2, "pregnancy": 1}.get(r["kind"], 0))
    stores = []
    for name in ("single", "bulk"):
        d = tmp_path / name
        write_config(d, password_hash)
        stores.append(Store(d))
    for r in children_first:
        stores[0].merge_foreign(dict(r), now=NOW)
    stores[1].merge_foreign_many([dict(r) for r in children_first], now=NOW)
    assert _tree(stores[1].data_dir) == _tree(stores[0].data_dir)
    preg = next(r for r in records if r["kind"] == "pregnancy")
    woman, p, entries = stores[1].history(preg["id"])
    assert p["id"] == preg["id"] and {e["id"] for e in entries} == {
        r["id"] for r in records if r.get("pregnancy_id") == preg["id"]}


def test_an_invalid_record_in_the_batch_writes_nothing(store, data_dir):
    rng = random.Random(3)
    store.merge_foreign_many(world(rng, 3, tag="old"), now=NOW)
    before = _all_files(data_dir)
    batch = world(rng, 5)
    bad = {**batch[0], "id": "bad-record-1", "stated_age": 200}
    batch.insert(9, bad)
    with pytest.raises(ValidationError) as e:
        store.merge_foreign_many(batch, now=NOW)
    assert e.value.record_id == "bad-record-1" and "stated_age" in e.value.errors
    assert "bad-record-1" in str(e.value) and "stated_age" in str(e.value)
    assert _all_files(data_dir) == before
    assert store.get(batch[0]["id"]) is None


def test_a_kind_clash_in_the_batch_writes_nothing(store, data_dir):
    rng = random.Random(4)
    records = world(rng, 3)
    store.merge_foreign(records[0], now=NOW)
    before = _all_files(data_dir)
    clash = {**records[1], "id": records[0]["id"]}  # same id, another kind
    assert clash["kind"] != records[0]["kind"]
    with pytest.raises(Conflict):
        store.merge_foreign_many(records[2:] + [clash], now=NOW)
    assert _all_files(data_dir) == before


def test_every_created_or_updated_record_has_its_audit_line(store):
    rng = random.Random(5)
    records = world(rng, 6)
    store.merge_foreign_many(records[:10], now=NOW - timedelta(days=1))
    batch = [copy_at(r, 2) for r in records[:5]] + [dict(r) for r in records[5:10]] + records[10:]
    outcomes = store.merge_foreign_many(batch, by="import:bundle:far", now=NOW)
    assert Counter(outcomes) == {"updated": 5, "unchanged": 5, "created": len(records) - 10}
    lines = store.audit(since="2026-03-16T09:30:00Z")
    audited = Counter((a["action"], a["id"], a["version"]) for a in lines)
    want = Counter([("import-update", r["id"], 2) for r in records[:5]]
                   + [("import-create", r["id"], 1) for r in records[10:]])
    assert audited == want
    assert all(a["by"] == "import:bundle:far" and a["at"] == "2026-03-16T09:30:00Z" for a in lines)
    update = next(a for a in lines if a["action"] == "import-update" and a["kind"] == "woman")
    assert update["changes"]["village"]["new"] == "edit 2.0"


def test_each_touched_partition_is_rewritten_once(store, data_dir, monkeypatch):
    import clinic.store.writer as writer_module

    rng = random.Random(6)
    records = world(rng, 12)
    writes: Counter[str] = Counter()
    real = writer_module.atomic_write_bytes

    def counting(path, payload):
        writes[path.relative_to(data_dir).as_posix()] += 1
        real(path, payload)

    monkeypatch.setattr(writer_module, "atomic_write_bytes", counting)
    store.merge_foreign_many(mixed_batch(rng, records), now=NOW)
    partitions = {k: n for k, n in writes.items() if not k.rsplit("/", 1)[-1].startswith(".")}
    assert len(partitions) > 3 and set(partitions.values()) == {1}
    assert sum(1 for _ in store.iter_records()) == len(records)


def test_audit_and_index_are_appended_once_per_file(store, monkeypatch):
    import clinic.store.index as index_module
    import clinic.store.writer as writer_module

    rng = random.Random(7)
    records = world(rng, 12)
    calls: Counter[str] = Counter()
    real_writer, real_index = writer_module.append_lines, index_module.append_lines

    def spy(real):
        def f(path, lines):
            calls[path.name if path.suffix == ".log" else path.parent.name + "/" + path.name] += 1
            real(path, lines)
        return f

    monkeypatch.setattr(writer_module, "append_lines", spy(real_writer))
    monkeypatch.setattr(index_module, "append_lines", spy(real_index))
    store.merge_foreign_many(records, now=NOW)
    assert calls["index.log"] == 1
    audit_files = {k for k in calls if k != "index.log"}
    assert audit_files and all(calls[k] == 1 for k in audit_files)


def test_an_empty_batch_does_nothing(store, data_dir):
    before = _all_files(data_dir)
    assert store.merge_foreign_many([], now=NOW) == []
    assert _all_files(data_dir) == before


def _audit_lines(store: Store, ids=None) -> Counter:
    return Counter(json.dumps(a, sort_keys=True) for a in store.audit() if ids is None or a["id"] in ids)


@pytest.mark.slow
def test_sigkill_during_a_bulk_import_leaves_each_record_whole_or_absent(tmp_path, password_hash):
    from tests.store.worker import NOW as WORKER_NOW

    root = Path(__file__).resolve().parents[2]
    rng = random.Random(2026)
    batch = mixed_batch(rng, world(rng, 120))
    batch_file = tmp_path / "batch.json"
    batch_file.write_text(json.dumps(batch), encoding="utf-8")
    ref_dir = tmp_path / "reference"
    write_config(ref_dir, password_hash)
    ref = Store(ref_dir)
    started = time.monotonic()
    ref.merge_foreign_many([dict(r) for r in batch], now=WORKER_NOW)
    took = time.monotonic() - started  # only to choose when to kill; nothing asserts on a time
    want = {r["id"]: r for r in ref.iter_records()}
    want_lines = _audit_lines(ref)
    for attempt in range(4):
        d = tmp_path / f"killed-{attempt}"
        write_config(d, password_hash)
        Store(d)
        child = subprocess.Popen([sys.executable, "-m", "tests.store.worker", "import", str(d), str(batch_file)],
                                 cwd=root, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
        assert child.stdout.readline() == b"start\n", child.stderr.read().decode()
        time.sleep(rng.uniform(0.4, 1.0) * took)  # mostly inside the writing phase
        os.kill(child.pid, signal.SIGKILL)
        child.communicate(timeout=30)
        reopened = Store(d)  # readable: a StoreCorrupt would fail here
        stored = {r["id"]: r for r in reopened.iter_records()}
        assert all(stored[i] == want[i] for i in stored), "a record is stored half-merged"
        assert _audit_lines(reopened) == _audit_lines(ref, set(stored)), "audit and store disagree"
        reopened.merge_foreign_many([dict(r) for r in batch], now=WORKER_NOW)  # the rerun completes it
        final = Store(d)
        assert {r["id"]: r for r in final.iter_records()} == want
        assert _audit_lines(final) == want_lines
        assert final.check(now=WORKER_NOW).ok


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_batch_order_does_not_change_the_stored_records(tmp_path, password_hash, seed):
    rng = random.Random(seed)
    batch = mixed_batch(rng, world(rng, 8))
    states = []
    for name, order in (("given", batch), ("reversed", batch[::-1]), ("shuffled", rng.sample(batch, len(batch)))):
        d = tmp_path / name
        write_config(d, password_hash)
        s = Store(d)
        s.merge_foreign_many([dict(r) for r in order], now=NOW)
        states.append(sorted(json.dumps(r, sort_keys=True) for r in s.iter_records()))
    assert states[0] == states[1] == states[2]
