"""A write interrupted between its steps still leaves every stored change with its audit line,
and no audit line for a change that was not stored (the journal, clinic/store/journal.py)."""
from __future__ import annotations

import random
from collections import Counter

import pytest

import clinic.store.journal as journal_module
import clinic.store.writer as writer_module
from clinic.store import Store
from tests.conftest import FACILITY_ID, NOW, USERNAME, write_config
from tests.store.foreign import mixed_batch, world


class Crash(Exception):
    """Stands for the process dying at that point."""


def _audit_covers_store(store: Store, once: bool = True) -> None:
    audited = Counter((a["id"], a["version"]) for a in store.audit())
    stored = {(r["id"], r["version"]) for r in store.iter_records()}
    assert stored <= set(audited), f"stored without an audit line: {sorted(stored - set(audited))[:5]}"
    extra = {k for k in audited if k[0] not in {s[0] for s in stored}}
    assert not extra, f"audit lines for records that were never stored: {sorted(extra)[:5]}"
    if once:
        assert all(n == 1 for k, n in audited.items()), "an audit line was written twice"


def _lines(store: Store, ids=None) -> Counter:
    return Counter(repr(sorted(a.items())) for a in store.audit() if ids is None or a["id"] in ids)


def _typing(store, pregnancy, rid="t-1"):
    return store.create("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02"}, by=USERNAME,
                        facility=FACILITY_ID, pregnancy_id=pregnancy["id"], record_id=rid, now=NOW).record


def test_crash_between_partition_write_and_audit_append_keeps_the_audit_line(data_dir, store, pregnancy,
                                                                              monkeypatch):
    def crash(path, lines):
        raise Crash("killed after the partition write")

    monkeypatch.setattr(writer_module, "append_lines", crash)
    with pytest.raises(Crash):
        _typing(store, pregnancy)
    monkeypatch.undo()
    reopened = Store(data_dir)
    assert reopened.get("t-1") is not None  # the partition write had happened
    (line,) = reopened.audit("t-1")
    assert line["action"] == "create" and line["version"] == 1
    _audit_covers_store(reopened)
    report = reopened.check(now=NOW)
    assert report.ok, report.problems
    assert any("interrupted write was recovered: 1 change" in n for n in report.notes)


def test_crash_before_the_partition_write_leaves_no_record_and_no_audit_line(data_dir, store, pregnancy,
                                                                              monkeypatch):
    def crash(self, record, partition):
        raise Crash("killed after the journal, before the partition write")

    monkeypatch.setattr(Store, "_put", crash)
    with pytest.raises(Crash):
        _typing(store, pregnancy)
    monkeypatch.undo()
    reopened = Store(data_dir)
    assert reopened.get("t-1") is None and reopened.audit("t-1") == []
    _audit_covers_store(reopened)
    assert reopened.check(now=NOW).ok
    _typing(reopened, pregnancy)  # the retry goes through
    assert len(Store(data_dir).audit("t-1")) == 1


def test_the_same_store_object_settles_its_own_interrupted_write(data_dir, store, pregnancy, monkeypatch):
    monkeypatch.setattr(writer_module, "append_lines", lambda path, lines: (_ for _ in ()).throw(Crash()))
    with pytest.raises(Crash):
        store.amend(pregnancy["id"], {"parity": 0, "gravidity": 1}, by=USERNAME, reason="typo", now=NOW)
    monkeypatch.undo()
    assert [a["action"] for a in store.audit(pregnancy["id"])] == ["create", "amend"]
    assert not (data_dir / "records" / ".journal").read_bytes()


def test_crash_during_recovery_does_not_write_an_audit_line_twice(data_dir, store, pregnancy, monkeypatch):
    monkeypatch.setattr(writer_module, "append_lines", lambda path, lines: (_ for _ in ()).throw(Crash()))
    with pytest.raises(Crash):
        _typing(store, pregnancy)
    monkeypatch.undo()
    real = journal_module.append_lines

    def append_then_die(path, lines):
        real(path, lines)
        raise Crash("killed after recovery appended, before it emptied the journal")

    monkeypatch.setattr(journal_module, "append_lines", append_then_die)
    with pytest.raises(Crash):
        Store(data_dir)
    monkeypatch.undo()
    reopened = Store(data_dir)
    assert len(reopened.audit("t-1")) == 1
    _audit_covers_store(reopened)


def _batch_stores(tmp_path, password_hash, seed=21):
    rng = random.Random(seed)
    records = world(rng, 14)
    batch = mixed_batch(rng, records)
    dirs = []
    for name in ("crashed", "reference"):
        d = tmp_path / name
        write_config(d, password_hash)
        dirs.append(d)
    return dirs, batch


@pytest.mark.parametrize("crash_at", [1, 3, 6])
def test_crash_midway_through_a_bulk_import_keeps_audit_and_store_in_step(tmp_path, password_hash,
                                                                          monkeypatch, crash_at):
    (crashed, reference), batch = _batch_stores(tmp_path, password_hash)
    store = Store(crashed)
    real = writer_module.atomic_write_bytes
    seen = []

    def die_on_nth_partition(path, payload):
        seen.append(path)
        if len(seen) == crash_at:
            raise Crash(f"killed before partition {crash_at} was replaced")
        real(path, payload)

    monkeypatch.setattr(writer_module, "atomic_write_bytes", die_on_nth_partition)
    with pytest.raises(Crash):
        store.merge_foreign_many([dict(r) for r in batch], now=NOW)
    monkeypatch.undo()
    ref = Store(reference)
    ref.merge_foreign_many([dict(r) for r in batch], now=NOW)
    want = {r["id"]: r for r in ref.iter_records()}

    reopened = Store(crashed)
    stored = {r["id"]: r for r in reopened.iter_records()}
    # The partitions written before the crash are in, whole (each record as the whole import
    # leaves it); the rest are absent; the audit holds exactly the lines of what is stored.
    assert len(stored) < len(want) and bool(stored) == (crash_at > 1)
    assert all(stored[i] == want[i] for i in stored)
    _audit_covers_store(reopened, once=False)
    assert _lines(reopened) == _lines(ref, set(stored))
    # Running the import again completes it: the same records and audit as one uninterrupted import.
    reopened.merge_foreign_many([dict(r) for r in batch], now=NOW)
    final = Store(crashed)
    assert {r["id"]: r for r in final.iter_records()} == want
    assert _lines(final) == _lines(ref)
    assert final.check(now=NOW).ok
