"""Twenty clients book women and record screens against a real `rhledger serve` on loopback at
the same time: no request fails, and afterwards the store holds exactly what each client was
acknowledged, each record once. Latency (p50/p95) is printed and written to
test-artifacts/load-test.json; it is a figure, never an assertion.

The run lasts RHLEDGER_LOAD_SECONDS seconds (default 10, to keep CI quick; the load test of
issue 10 is RHLEDGER_LOAD_SECONDS=60)."""
from __future__ import annotations

import json
import os
import threading
import time
from collections import Counter

import pytest

from clinic.store import Store
from tests.load.harness import ROOT, Client, Refused, Server, booking, booking_ids, make_data_dir, screen_entry

CLIENTS = 20
SECONDS = float(os.environ.get("RHLEDGER_LOAD_SECONDS", "10"))

pytestmark = pytest.mark.slow


def _percentile(values: list[float], q: float) -> float:
    ordered = sorted(values)
    return ordered[max(0, -(-len(ordered) * q // 100) - 1)] if ordered else float("nan")


class Worker(threading.Thread):
    def __init__(self, n: int, url: str, start_at: float, stop_at: float):
        super().__init__(name=f"load-client-{n}", daemon=True)
        self.n, self.url, self.start_at, self.stop_at = n, url, start_at, stop_at
        self.acked: list[str] = []
        self.tags: list[str] = []
        self.latency: dict[str, list[float]] = {"booking": [], "entry": [], "read": []}
        self.errors: list[str] = []

    def _timed(self, what: str, fn):
        t = time.perf_counter()
        try:
            out = fn()
        except Refused as e:
            self.errors.append(f"{what}: no answer ({e})")
            return None
        self.latency[what].append(1000 * (time.perf_counter() - t))
        return out

    def run(self) -> None:
        try:
            c = Client(self.url).signin()
        except (AssertionError, Refused) as e:
            self.errors.append(f"sign-in: {e}")
            return
        while time.monotonic() < self.start_at:
            time.sleep(0.01)
        i = 0
        while time.monotonic() < self.stop_at:
            tag = f"{self.n}-{i}"
            i += 1
            b = booking(tag)
            got = self._timed("booking", lambda b=b: c.post("/api/v1/bookings", b))
            if got is None:
                continue
            if got[0] != 201:
                self.errors.append(f"booking {tag}: {got[0]} {got[1]}")
                continue
            self.acked += booking_ids(b)
            self.tags.append(tag)
            e = screen_entry(b["pregnancy"]["id"], b["woman"]["id"])
            got = self._timed("entry", lambda e=e: c.post("/api/v1/records", e))
            if got is None:
                continue
            if got[0] != 201:
                self.errors.append(f"entry {tag}: {got[0]} {got[1]}")
                continue
            self.acked.append(e["id"])
            got = self._timed("read", lambda p=b["pregnancy"]["id"]: c.request("GET", f"/api/v1/pregnancies/{p}"))
            if got is None:
                continue
            if got[0] != 200:
                self.errors.append(f"read {tag}: {got[0]}")
            elif e["id"] not in {x["id"] for x in json.loads(got[1])["entries"]}:
                self.errors.append(f"read {tag}: the acknowledged screen is not in the pregnancy")


def test_twenty_clients_lose_and_double_nothing(tmp_path):
    d = make_data_dir(tmp_path / "data")
    server = Server(d, threads=8).start()
    try:
        start_at = time.monotonic() + 2.0   # every client signed in before the clock starts
        workers = [Worker(n, server.url, start_at, start_at + SECONDS) for n in range(CLIENTS)]
        for w in workers:
            w.start()
        for w in workers:
            w.join(timeout=SECONDS + 120)
        assert not any(w.is_alive() for w in workers), "a client hung"
    finally:
        server.stop()
    errors = [e for w in workers for e in w.errors]
    assert not errors, f"{len(errors)} failed requests, e.g. {errors[:5]}\nserver log: {server.output()[-2000:]}"

    acked = [i for w in workers for i in w.acked]
    store = Store(d)
    stored = {r["id"]: r for r in store.iter_records()}
    missing = [i for i in acked if i not in stored]
    assert not missing, f"{len(missing)} of {len(acked)} acknowledged records are not in the store"
    assert len(set(acked)) == len(acked) == len(stored), "records in the store that no client was acknowledged"
    index_ids = Counter(line.split(" ", 1)[0] for line in
                        (d / "records" / "index.log").read_text(encoding="utf-8").splitlines())
    assert max(index_ids.values()) == 1 and set(index_ids) == set(acked)
    creates = Counter(a["id"] for a in store.audit() if a["action"] == "create")
    assert creates == Counter(acked), "each record has exactly one create line in the audit log"
    registers = Counter(r.get("register_no") for r in stored.values() if r["kind"] == "woman")
    assert max(registers.values()) == 1 and len(registers) == sum(len(w.tags) for w in workers)
    assert store.check().ok

    figures = {"clients": CLIENTS, "seconds": SECONDS, "requests": 0, "acknowledged_records": len(acked)}
    for what in ("booking", "entry", "read"):
        lat = [x for w in workers for x in w.latency[what]]
        figures["requests"] += len(lat)
        figures[what] = {"n": len(lat), "p50_ms": round(_percentile(lat, 50), 1),
                         "p95_ms": round(_percentile(lat, 95), 1)}
    figures["requests_per_s"] = round(figures["requests"] / SECONDS, 1)
    out = ROOT / "test-artifacts"
    out.mkdir(exist_ok=True)
    (out / "load-test.json").write_text(json.dumps(figures, indent=2) + "\n", encoding="utf-8")
    print(f"\nload test: {json.dumps(figures)}")
