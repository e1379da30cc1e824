"""Writers in two processes, and in several threads, lose none of each other's updates."""
from __future__ import annotations

import subprocess
import sys
import threading
from pathlib import Path

import pytest

from clinic.store import Store
from tests.conftest import FACILITY_ID

ROOT = Path(__file__).resolve().parents[2]
TYPING = {"abo": "B", "rhd": "negative", "tested_on": "2026-03-02"}


def _run_together(*arg_lists) -> list[tuple[str, str]]:
    """Start workers, release them at the same moment, return each one's (stdout, stderr)."""
    kids = [subprocess.Popen([sys.executable, "-m", "tests.store.worker", *map(str, args)], cwd=ROOT,
                             stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
            for args in arg_lists]
    for k in kids:
        assert k.stdout.readline() == b"ready\n", k.stderr.read().decode()
    for k in kids:
        k.stdin.write(b"go\n")
        k.stdin.flush()
    out = []
    for k in kids:
        o, e = k.communicate(timeout=120)
        assert k.returncode == 0, e.decode()
        out.append((o.decode(), e.decode()))
    return out


@pytest.mark.slow
def test_two_processes_creating_in_one_partition_lose_nothing(data_dir, store, pregnancy):
    results = _run_together(*[("create", data_dir, pregnancy["id"], 60, tag) for tag in ("a", "b")])
    ids = [i for out, _ in results for i in out.split()]
    assert len(ids) == 120
    # The parent's Store sees the other processes' writes (index read incrementally, files re-read).
    assert {e["id"] for e in store.entries(pregnancy["id"])} == set(ids)
    store.create("typing", TYPING, by="parent", facility=FACILITY_ID, pregnancy_id=pregnancy["id"])
    assert len(Store(data_dir).entries(pregnancy["id"])) == 121


@pytest.mark.slow
def test_two_processes_amending_one_record_lose_no_amendment(data_dir, store, woman, pregnancy):
    t = store.create("typing", TYPING, by="u", facility=FACILITY_ID, pregnancy_id=pregnancy["id"]).record
    _run_together(*[("amend", data_dir, t["id"], 30, tag) for tag in ("a", "b")])
    rec = store.get(t["id"])
    assert rec["version"] == 61 and len(rec["amendments"]) == 60
    assert len(store.audit(t["id"])) == 61


def test_threads_sharing_a_store_lose_nothing(store, pregnancy):
    errors, ids, lock = [], [], threading.Lock()

    def work(n):
        try:
            for _ in range(n):
                rid = store.create("typing", TYPING, by="t", facility=FACILITY_ID,
                                   pregnancy_id=pregnancy["id"]).record["id"]
                with lock:
                    ids.append(rid)
        except Exception as e:  # noqa: BLE001 - reported below
            errors.append(e)

    threads = [threading.Thread(target=work, args=(15,)) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    assert {e["id"] for e in store.entries(pregnancy["id"])} == set(ids) and len(ids) == 60


def test_threads_with_separate_stores_lose_nothing(data_dir, store, pregnancy):
    stores = [Store(data_dir) for _ in range(3)]
    errors = []

    def work(s):
        try:
            for _ in range(10):
                s.create("typing", TYPING, by="t", facility=FACILITY_ID, pregnancy_id=pregnancy["id"])
        except Exception as e:  # noqa: BLE001
            errors.append(e)

    threads = [threading.Thread(target=work, args=(s,)) for s in stores]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    assert len(store.entries(pregnancy["id"])) == 30


def test_a_lock_held_too_long_gives_a_clear_busy_error(data_dir, store, now):
    import filelock
    import pytest

    from clinic.store import StoreBusy

    impatient = Store(data_dir, lock_timeout=0.2)
    with filelock.FileLock(str(data_dir / "store.lock")):
        with pytest.raises(StoreBusy, match="locked by another process"):
            impatient.create("woman", {"name": "Waiting Person", "stated_age": 30}, by="u",
                             facility=FACILITY_ID, now=now)
    assert store.women_of() == []
