"""The server killed (SIGKILL) while several clients write as fast as they can, again and again:
each time the store opens and holds every write that was acknowledged, and a client that
sends again what got no answer (same ids, as the phone's outbox does) doubles nothing."""
from __future__ import annotations

import random
import threading
import time
from collections import Counter

import pytest

from clinic.store import Store
from tests.load.harness import Client, Refused, Server, booking, booking_ids, make_data_dir, screen_entry

CLIENTS = 4
KILLS = 3
ACKED_BEFORE_KILL = 6   # writes acknowledged in a round before the server is killed

pytestmark = pytest.mark.slow


class Storm(threading.Thread):
    """Books and records until the server stops answering; what got no answer is kept to resend."""

    def __init__(self, n: int, url: str, pending: list[tuple[str, dict]]):
        super().__init__(name=f"storm-{n}", daemon=True)
        self.n, self.url = n, url
        self.pending = list(pending)      # (path, body) sent before without an answer
        self.acked: list[str] = []
        self.errors: list[str] = []
        self.sent = 0

    def _send(self, c: Client, path: str, body: dict) -> bool:
        try:
            status, answer = c.post(path, body)
        except Refused:
            self.pending.append((path, body))
            return False
        if status not in (200, 201):  # 200: a resend of something stored before its answer was lost
            self.errors.append(f"{path}: {status} {answer}")
            return True
        self.acked += booking_ids(body) if path.endswith("/bookings") else [body["id"]]
        return True

    def run(self) -> None:
        try:
            c = Client(self.url, timeout=10).signin()
        except (Refused, AssertionError):
            return  # killed before this client signed in: its pending writes wait for the next round
        resend, self.pending = self.pending, []
        for path, body in resend:
            if not self._send(c, path, body):
                return
        while True:
            self.sent += 1
            b = booking(f"{self.n}-{self.sent}-{random.random():.6f}")
            if not self._send(c, "/api/v1/bookings", b):
                return
            if not self._send(c, "/api/v1/records", screen_entry(b["pregnancy"]["id"], b["woman"]["id"])):
                return


def test_kill_during_write_storm_loses_no_acknowledged_write(tmp_path):
    d = make_data_dir(tmp_path / "data")
    rng = random.Random(20261202)
    acked: list[str] = []
    pending: dict[int, list] = {n: [] for n in range(CLIENTS)}
    errors: list[str] = []
    for round_ in range(KILLS + 1):
        server = Server(d).start()
        storms = [Storm(n, server.url, pending[n]) for n in range(CLIENTS)]
        for s in storms:
            s.start()
        # Kill (or, the last round, stop) once the storm is under way: some writes acknowledged in
        # this round (a loaded machine may take seconds to sign the clients in), then a moment more.
        deadline = time.monotonic() + 60
        while sum(len(s.acked) for s in storms) < ACKED_BEFORE_KILL and time.monotonic() < deadline \
                and any(s.is_alive() for s in storms):
            time.sleep(0.02)
        time.sleep(rng.uniform(0.1, 0.8))
        if round_ < KILLS:
            server.kill()
        else:
            server.stop()
        for s in storms:
            s.join(timeout=60)
            assert not s.is_alive(), "a client hung after the server went away"
            acked += s.acked
            errors += s.errors
            pending[s.n] = s.pending
        assert not errors, f"refused writes: {errors[:5]}\n{server.output()[-2000:]}"
        # The store opens after every kill (StoreCorrupt would fail here) and has every acknowledged write.
        store = Store(d)
        stored = {r["id"] for r in store.iter_records()}
        missing = [i for i in acked if i not in stored]
        assert not missing, f"round {round_}: {len(missing)} of {len(acked)} acknowledged writes lost"
    assert len(acked) > 20, "the storm wrote too little to mean anything"
    store = Store(d)
    report = store.check()
    assert report.ok, report.problems
    women = Counter(r["register_no"] for r in store.iter_records(kind="woman"))
    assert max(women.values()) == 1, "a booking sent again was stored twice"
    lines = Counter(x.split(" ", 1)[0] for x in (d / "records" / "index.log").read_text().splitlines())
    assert max(lines.values()) == 1
    assert not list((d / "records").glob("**/.*.tmp")), "a temp file of a killed write survived reopening"
