"""A child process for the fault tests (run: python -m tests.faults.child ...).

    web DATA          the app on DATA through Flask's test client, signed in as the load-test midwife;
                      prints "ready", then reads one JSON command a line from stdin and prints one
                      JSON answer a line:
                        {"fsize": N}                 from now on no file may grow past N bytes
                                                     (RLIMIT_FSIZE; SIGXFSZ ignored: the write fails
                                                     with EFBIG, as on a full disk)
                        {"post": PATH, "body": {..}} -> {"status", "json"}
                        {"form": PATH, "data": {..}} an HTML form post -> {"status", "text"}
                        {"quit": true}
    cut LIMIT WHAT DATA OUT
                      no file may grow past LIMIT bytes, and the process is killed by the kernel
                      (SIGXFSZ) the moment one tries: a power cut in the middle of writing. WHAT is
                      backup, export or card (writes into DATA, or to OUT).

``drop_dac()`` is the preexec_fn that lets root feel file permissions (a read-only folder is
read-only to root too once CAP_DAC_OVERRIDE and friends are gone from the bounding set).
"""
from __future__ import annotations

import ctypes
import json
import os
import re
import resource
import signal
import sys

PR_CAPBSET_DROP = 24
# CAP_DAC_OVERRIDE, CAP_DAC_READ_SEARCH, CAP_FOWNER, CAP_LINUX_IMMUTABLE
DAC_CAPS = (1, 2, 3, 9)


def drop_dac() -> None:
    """preexec_fn: for root, drop the capabilities that bypass file permissions (Linux)."""
    if os.geteuid() != 0:
        return
    libc = ctypes.CDLL(None, use_errno=True)
    for cap in DAC_CAPS:
        if libc.prctl(PR_CAPBSET_DROP, cap, 0, 0, 0) != 0:
            raise OSError(ctypes.get_errno(), "prctl(PR_CAPBSET_DROP) failed")


def _web(data: str) -> None:
    from clinic.web import create_app
    from tests.load.harness import PASSWORD, USER

    app = create_app(data)
    client = app.test_client()
    page = client.get("/signin").get_data(as_text=True)
    token = re.search(r'name="csrf_token" value="([^"]+)"', page).group(1)
    r = client.post("/signin", data={"csrf_token": token, "username": USER, "password": PASSWORD})
    assert r.status_code == 302, r.status_code
    csrf = client.get("/api/v1/session").get_json()["csrf_token"]
    print("ready", flush=True)
    for line in sys.stdin:
        cmd = json.loads(line)
        if cmd.get("quit"):
            break
        if "fsize" in cmd:
            signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
            resource.setrlimit(resource.RLIMIT_FSIZE, (cmd["fsize"], cmd["fsize"]))
            out = {"ok": True}
        elif "post" in cmd:
            r = client.post(cmd["post"], json=cmd["body"], headers={"X-CSRF-Token": csrf})
            out = {"status": r.status_code, "json": r.get_json(silent=True)}
        elif "form" in cmd:
            r = client.post(cmd["form"], data={**cmd["data"], "csrf_token": csrf})
            out = {"status": r.status_code, "text": r.get_data(as_text=True)}
        else:
            raise SystemExit(f"unknown command {cmd}")
        print(json.dumps(out), flush=True)


def _cut(limit: int, what: str, data: str, out: str) -> None:
    from datetime import datetime, timezone

    from clinic.store import Store

    store = Store(data)
    now = datetime(2026, 12, 1, 9, 0, tzinfo=timezone.utc)
    if what == "card":
        from clinic.cli.main import cli

        pid = store.pregnancies()[0]["id"]
        args = ["card", pid, "--out", out, "--data", data]
    elif what == "report":
        from clinic.cli.main import cli

        args = ["report", "--month", "2026-11", "--format", "csv", "--out", out, "--data", data]
    # Only now the limit: whatever grows past it dies mid-write (Python ignores SIGXFSZ unless told).
    signal.signal(signal.SIGXFSZ, signal.SIG_DFL)
    resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    print("cutting", flush=True)
    if what == "backup":
        store.backup(now=now)
    elif what == "export":
        from clinic.reports.bundle import export_bundle

        export_bundle(store, store.data_dir, facility=store.settings.facility_id, since="LAST", out=None)
    else:
        cli.main(args=args, standalone_mode=False)
    print("finished", flush=True)


def main(argv: list[str]) -> None:
    if argv[0] == "web":
        _web(argv[1])
    elif argv[0] == "cut":
        _cut(int(argv[1]), argv[2], argv[3], argv[4])
    else:
        raise SystemExit(f"unknown command {argv[0]}")


if __name__ == "__main__":
    main(sys.argv[1:])
