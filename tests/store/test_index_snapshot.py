"""Opening reads the index from records/.index.snapshot when it still matches the log, and the
result is always the index a full parse of index.log gives: after more writes, and when the
snapshot is damaged, the log was replaced or cut, or its bytes changed under the snapshot."""
from __future__ import annotations

import os
import shutil

import pytest

from clinic.store import Store, index_snapshot
from clinic.store.backup import store_files
from clinic.store.index import IndexLog

FAC = "test-clinic"


@pytest.fixture(autouse=True)
def small_snapshots(monkeypatch):
    monkeypatch.setattr(index_snapshot, "EVERY", 2000)   # a snapshot every ~20 lines


def _grow(store: Store, n: int, tag: str) -> None:
    for i in range(n):
        w = store.create("woman", {"name": f"Snapshot Woman {tag}{i}", "stated_age": 30}, by="t", facility=FAC).record
        store.create("pregnancy", {"booked_on": "2026-03-01", "lmp": "2026-01-01", "status": "ongoing",
                                   "gravidity": 1, "parity": 0}, by="t", facility=FAC, woman_id=w["id"])


def _parsed(data_dir) -> IndexLog:
    """The index as a full parse of the log gives it (no snapshot)."""
    ix = IndexLog(data_dir / "records" / "index.log", on_corrupt=lambda p, e: AssertionError(e))
    real = index_snapshot.load
    index_snapshot.load = lambda *a: False
    try:
        ix.refresh()
    finally:
        index_snapshot.load = real
    return ix


def _same(a: IndexLog, b: IndexLog) -> None:
    assert a.locs == b.locs and a.order == b.order and a.by_kind == b.by_kind
    assert a.children == b.children and a.pregnancies_of == b.pregnancies_of


def _loaded_from_snapshot(data_dir, monkeypatch) -> tuple[Store, bool]:
    used = []
    real = index_snapshot.load
    monkeypatch.setattr(index_snapshot, "load", lambda *a: used.append(real(*a)) or used[-1])
    s = Store(data_dir)
    monkeypatch.setattr(index_snapshot, "load", real)
    return s, bool(used and used[0])


def test_open_uses_a_matching_snapshot_and_reads_on_from_it(data_dir, store, monkeypatch):
    _grow(store, 15, "a")
    snap = data_dir / "records" / index_snapshot.SNAPSHOT_FILE
    assert snap.exists()
    _grow(store, 3, "b")                      # lines after the snapshot
    reopened, used = _loaded_from_snapshot(data_dir, monkeypatch)
    assert used
    _same(reopened._index, _parsed(data_dir))
    assert len(reopened.pregnancies()) == 18
    assert not any(p.name == index_snapshot.SNAPSHOT_FILE for p in store_files(data_dir))  # never in a backup


@pytest.mark.parametrize("spoil", ["damaged", "replaced", "cut", "changed"])
def test_a_snapshot_that_does_not_match_the_log_is_not_used(data_dir, store, monkeypatch, spoil):
    _grow(store, 15, "a")
    log = data_dir / "records" / "index.log"
    snap = data_dir / "records" / index_snapshot.SNAPSHOT_FILE
    assert snap.exists()
    if spoil == "damaged":
        snap.write_bytes(snap.read_bytes()[:100])
    elif spoil == "replaced":                  # a restore or a rebuild writes a new file
        shutil.copyfile(log, log.with_name("x"))
        os.replace(log.with_name("x"), log)
    elif spoil == "cut":
        data = log.read_bytes().splitlines(keepends=True)
        log.write_bytes(b"".join(data[:5]))
    else:                                      # same file and size, other bytes under the snapshot
        import marshal

        offset = marshal.loads(snap.read_bytes())[2]
        original = log.read_bytes()
        for at in (offset - 10, 40):           # near where it ends, and near the start
            data = bytearray(original)
            data[at] = ord("x") if data[at] != ord("x") else ord("y")
            with open(log, "r+b") as fh:
                fh.write(bytes(data))
            assert not _loaded_from_snapshot(data_dir, monkeypatch)[1]
        with open(log, "r+b") as fh:
            fh.write(original)
        # The open above re-parsed the changed log and snapshotted that: it does not match either.
        reopened, used = _loaded_from_snapshot(data_dir, monkeypatch)
        assert not used
        _same(reopened._index, _parsed(data_dir))
        return
    reopened, used = _loaded_from_snapshot(data_dir, monkeypatch)
    assert not used
    _same(reopened._index, _parsed(data_dir))
