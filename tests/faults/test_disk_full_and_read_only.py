"""A full disk (a file-size limit in the server's process) and a read-only data folder: the write
is refused with a message that says what happened and what to do, nothing of it is
acknowledged, the store stays whole, and once the disk has room again the same write saves."""
from __future__ import annotations

import json
import os
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from clinic.store import Store
from tests.faults.child import drop_dac
from tests.load.harness import ROOT, SERVE, booking, booking_ids, child_env, free_port, make_data_dir, screen_entry


class WebChild:
    """The app in a child process, driven one JSON command at a time."""

    def __init__(self, data_dir: Path, *, preexec=None):
        self.proc = subprocess.Popen([sys.executable, "-m", "tests.faults.child", "web", str(data_dir)], cwd=ROOT,
                                     env=child_env(), stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                     stderr=subprocess.PIPE, text=True, preexec_fn=preexec)
        line = self.proc.stdout.readline()
        assert line.strip() == "ready", line + self.proc.stderr.read()

    def __call__(self, **cmd) -> dict:
        self.proc.stdin.write(json.dumps(cmd) + "\n")
        self.proc.stdin.flush()
        line = self.proc.stdout.readline()
        assert line, self.proc.stderr.read()
        return json.loads(line)

    def close(self) -> str:
        self.proc.stdin.write(json.dumps({"quit": True}) + "\n")
        self.proc.stdin.flush()
        _, err = self.proc.communicate(timeout=30)
        return err


def _book(web: WebChild) -> tuple[dict, list[str]]:
    b = booking("before")
    r = web(post="/api/v1/bookings", body=b)
    assert r["status"] == 201, r
    e = screen_entry(b["pregnancy"]["id"], b["woman"]["id"])
    r = web(post="/api/v1/records", body=e)
    assert r["status"] == 201, r
    return b, booking_ids(b) + [e["id"]]


def _intact(d: Path, acked: list[str], refused: list[str]) -> Store:
    store = Store(d)
    report = store.check()
    assert report.ok, report.problems
    for rid in acked:
        assert store.get(rid) is not None, f"acknowledged record {rid} lost"
    for rid in refused:
        assert store.get(rid) is None, f"refused record {rid} was stored"
    assert not list((d / "records").glob("**/.*.tmp")), "a temp file of the failed write was left behind"
    return store


def _files(d: Path) -> list[Path]:
    return [p for p in (d / "records").rglob("*") if p.is_file()] + [p for p in (d / "audit").rglob("*")
                                                                        if p.is_file()]


def test_disk_full_refuses_the_write_clearly_and_keeps_the_store(tmp_path):
    d = make_data_dir(tmp_path / "data")
    web = WebChild(d)
    b, acked = _book(web)
    partition = max((d / "records").glob("*/*.json"), key=lambda p: p.stat().st_size)
    assert max(p.stat().st_size for p in _files(d) if p.suffix != ".json") < partition.stat().st_size
    # The disk fills up: the next rewrite of that partition cannot be written.
    web(fsize=partition.stat().st_size + 40)
    e = screen_entry(b["pregnancy"]["id"], b["woman"]["id"])
    r = web(post="/api/v1/records", body=e)
    assert r["status"] == 503, r
    msg = r["json"]["error"]
    assert "is full" in msg and "Nothing was saved" in msg and "Free some space" in msg, msg
    # The HTML form says the same on the page.
    f = web(form=f"/pregnancies/{b['pregnancy']['id']}/add/screen",
            data={"id": screen_entry(b["pregnancy"]["id"], b["woman"]["id"])["id"], "kind": "screen",
                  "woman_id": b["woman"]["id"], "pregnancy_id": b["pregnancy"]["id"],
                  "sampled_at": e["fields"]["sampled_at"][:16].replace("Z", ""), "result": "negative"})
    assert f["status"] == 503, f["status"]
    assert "is full" in f["text"] and "Free some space" in f["text"]
    web.close()
    _intact(d, acked, [e["id"]])
    # Room again (a new process, no limit): the same write, same id, saves once.
    web = WebChild(d)
    r = web(post="/api/v1/records", body=e)
    assert r["status"] == 201, r
    web.close()
    store = _intact(d, acked + [e["id"]], [])
    assert [a["id"] for a in store.audit() if a["id"] == e["id"]] == [e["id"]]


def _make_read_only(d: Path) -> list[tuple[Path, int]]:
    changed = []
    for p in [d, *d.rglob("*")]:
        mode = p.stat().st_mode
        changed.append((p, mode))
        os.chmod(p, stat.S_IMODE(mode) & ~(stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH))
    return changed


def _restore(changed: list[tuple[Path, int]]) -> None:
    for p, mode in reversed(changed):
        os.chmod(p, stat.S_IMODE(mode))


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="drops Linux capabilities for root")
def test_read_only_data_folder_refuses_the_write_clearly_and_keeps_the_store(tmp_path):
    d = make_data_dir(tmp_path / "data")
    web = WebChild(d, preexec=drop_dac)   # as root too, file permissions now apply
    b, acked = _book(web)
    changed = _make_read_only(d)
    try:
        e = screen_entry(b["pregnancy"]["id"], b["woman"]["id"])
        r = web(post="/api/v1/records", body=e)
        assert r["status"] == 503, r
        msg = r["json"]["error"]
        assert "cannot be written" in msg and "Nothing was saved" in msg, msg
        r = web(post="/api/v1/bookings", body=booking("while-read-only"))
        assert r["status"] == 503, r
        web.close()
        # Starting the server on a read-only folder says so and stops, without a traceback.
        res = subprocess.run([sys.executable, "-c", SERVE, "serve", "--data", str(d), "--port", str(free_port())],
                             env=child_env(), capture_output=True, text=True, timeout=60, preexec_fn=drop_dac)
        assert res.returncode != 0
        assert "Error:" in res.stderr and "cannot be written" in res.stderr, res.stderr
        assert "Traceback" not in res.stderr, res.stderr
    finally:
        _restore(changed)
    _intact(d, acked, [e["id"]])
