"""A writer killed with SIGKILL mid-loop leaves a readable store holding every acknowledged write."""
from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from clinic.store import Store

ROOT = Path(__file__).resolve().parents[2]


def _spawn(*args) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "tests.store.worker", *map(str, args)], cwd=ROOT,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def _kill_while_writing(data_dir, pregnancy_id, delay) -> list[str]:
    """Start a writer, SIGKILL it after ``delay`` s; the ids it acknowledged before dying."""
    child = _spawn("forever", data_dir, pregnancy_id)
    first = child.stdout.readline()  # it is writing
    assert first, child.stderr.read().decode()
    time.sleep(delay)
    os.kill(child.pid, signal.SIGKILL)
    rest, _ = child.communicate(timeout=10)
    assert child.returncode == -signal.SIGKILL
    return [first.decode().strip()] + rest.decode().split()


@pytest.mark.slow
def test_sigkill_while_writing_loses_no_acknowledged_write(data_dir, store, pregnancy):
    rng = random.Random(20260316)
    acknowledged: list[str] = []
    # Several kills on one store: the partition grows, so later kills land inside longer writes.
    for _ in range(6):
        acknowledged += _kill_while_writing(data_dir, pregnancy["id"], rng.uniform(0.05, 0.5))
        reopened = Store(data_dir)  # parses every partition, or raises StoreCorrupt
        stored = {e["id"] for e in reopened.entries(pregnancy["id"])}
        missing = [i for i in acknowledged if i not in stored]
        assert not missing, f"{len(missing)} of {len(acknowledged)} acknowledged writes lost"
    report = reopened.check()
    assert report.ok, report.problems
    assert set(acknowledged) <= {a["id"] for a in reopened.audit()}
    # The store still takes writes after the crashes.
    rec = reopened.create("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02"},
                          by="after-crash", facility="test-clinic", pregnancy_id=pregnancy["id"]).record
    assert Store(data_dir).get(rec["id"]) is not None


def test_no_temp_file_or_torn_line_survives_reopening(data_dir, store, pregnancy):
    child = _spawn("forever", data_dir, pregnancy["id"])
    child.stdout.readline()
    time.sleep(0.2)
    os.kill(child.pid, signal.SIGKILL)
    child.communicate(timeout=10)
    s = Store(data_dir)
    assert not list((data_dir / "records").glob("*/.*.tmp"))
    s.create("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02"}, by="x",
             facility="test-clinic", pregnancy_id=pregnancy["id"])
    assert (data_dir / "records" / "index.log").read_bytes().endswith(b"\n")
