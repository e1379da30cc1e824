"""A real `rhledger serve` in a child process and plain HTTP clients for it (standard library
only): what the load and fault tests drive. Everything is invented: the clinic, the midwife
and every woman booked."""
from __future__ import annotations

import http.cookiejar
import json
import os
import re
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.parse
import urllib.request
import uuid
from datetime import datetime, timedelta, timezone
from pathlib import Path

from werkzeug.security import generate_password_hash

ROOT = Path(__file__).resolve().parents[2]
FACILITY = "load-clinic"
USER, PASSWORD = "midwife", "load test password"
TZ_NAME = "Africa/Nairobi"
CONFIG = """\
[facility]
id = "{facility}"
name = "Load Test Clinic"
kind = "clinic"
timezone = "{tz}"

[care]
profile = "bsh-2014"

[[stock.products]]
name = "Anti-D 1500"
vial_iu = 1500
routes = ["IM", "IV"]

[[accounts]]
username = "{user}"
display_name = "Load Midwife"
role = "midwife"
password_hash = "{pw}"
"""
SERVE = "import sys; from clinic.cli.main import cli; sys.exit(cli())"


def make_data_dir(d: Path) -> Path:
    d.mkdir(parents=True, exist_ok=True)
    pw = generate_password_hash(PASSWORD, method="pbkdf2:sha256:1000")
    (d / "config.toml").write_text(CONFIG.format(facility=FACILITY, tz=TZ_NAME, user=USER, pw=pw), encoding="utf-8")
    return d


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def child_env(**extra: str) -> dict:
    return dict(os.environ, PYTHONPATH=str(ROOT), **extra)


class Server:
    """`rhledger serve --data DIR --port P` in a child process."""

    def __init__(self, data_dir: Path, port: int | None = None, threads: int = 8):
        self.data_dir = Path(data_dir)
        self.port = port or free_port()
        self.threads = threads
        self.proc: subprocess.Popen | None = None
        self.log = self.data_dir.parent / f"serve-{self.port}.log"

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def start(self, timeout: float = 60) -> Server:
        with open(self.log, "ab") as log:
            self.proc = subprocess.Popen([sys.executable, "-c", SERVE, "serve", "--data", str(self.data_dir),
                                          "--port", str(self.port), "--threads", str(self.threads)],
                                         env=child_env(), stdout=log, stderr=subprocess.STDOUT)
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise AssertionError(f"rhledger serve exited ({self.proc.returncode}): {self.output()[-3000:]}")
            try:
                with socket.create_connection(("127.0.0.1", self.port), timeout=0.5):
                    return self
            except OSError:
                time.sleep(0.05)
        self.kill()
        raise AssertionError(f"rhledger serve did not listen within {timeout} s: {self.output()[-3000:]}")

    def output(self) -> str:
        try:
            return self.log.read_text(errors="replace")
        except FileNotFoundError:
            return ""

    def kill(self) -> None:
        """SIGKILL: no clean-up runs, as when the power goes."""
        if self.proc is not None and self.proc.poll() is None:
            os.kill(self.proc.pid, signal.SIGKILL)
            self.proc.wait(timeout=30)

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.kill()


class Refused(Exception):
    """No HTTP answer (connection refused or reset): the request was not acknowledged."""


class Client:
    """One signed-in browser-less client: cookies, the CSRF token, JSON in and out."""

    def __init__(self, base: str, timeout: float = 30):
        self.base = base
        self.timeout = timeout
        self.opener = urllib.request.build_opener(urllib.request.HTTPCookieProcessor(http.cookiejar.CookieJar()))
        self.csrf = ""

    def request(self, method: str, path: str, body: bytes | None = None,
                headers: dict | None = None) -> tuple[int, bytes]:
        req = urllib.request.Request(self.base + path, data=body, method=method, headers=headers or {})
        try:
            with self.opener.open(req, timeout=self.timeout) as resp:
                return resp.status, resp.read()
        except urllib.error.HTTPError as e:
            return e.code, e.read()
        except (urllib.error.URLError, ConnectionError, TimeoutError, OSError) as e:
            raise Refused(str(e)) from None

    def signin(self, user: str = USER, password: str = PASSWORD) -> Client:
        status, page = self.request("GET", "/signin")
        m = re.search(rb'name="csrf_token" value="([^"]+)"', page)
        assert status == 200 and m, f"no sign-in form ({status})"
        form = urllib.parse.urlencode({"csrf_token": m.group(1).decode(), "username": user, "password": password})
        status, page = self.request("POST", "/signin", form.encode(),
                                    {"Content-Type": "application/x-www-form-urlencoded"})
        assert status == 200 and b'name="csrf-token"' in page, f"sign-in failed ({status})"
        status, body = self.request("GET", "/api/v1/session")
        self.csrf = json.loads(body)["csrf_token"]
        return self

    def post(self, path: str, obj) -> tuple[int, dict]:
        status, body = self.request("POST", path, json.dumps(obj).encode(),
                                    {"Content-Type": "application/json", "X-CSRF-Token": self.csrf})
        try:
            return status, json.loads(body or b"{}")
        except ValueError:
            return status, {"error": body[:300].decode(errors="replace")}


# ---- what the clients send ---------------------------------------------------------------

def new_id() -> str:
    return str(uuid.uuid4())


def _today(days: int = 0) -> str:
    from zoneinfo import ZoneInfo

    return (datetime.now(ZoneInfo(TZ_NAME)) - timedelta(days=days)).date().isoformat()


def _ago(minutes: int) -> str:
    return (datetime.now(timezone.utc) - timedelta(minutes=minutes)).strftime("%Y-%m-%dT%H:%M:%SZ")


def booking(tag: str) -> dict:
    """A new woman and her pregnancy with a typing, as the booking form sends them."""
    return {
        "woman": {"id": new_id(), "fields": {"name": f"Loadtest Woman {tag}", "stated_age": 27,
                                             "village": "Testvale", "register_no": f"LT-{tag}"}},
        "pregnancy": {"id": new_id(), "fields": {"booked_on": _today(), "lmp": _today(70), "status": "ongoing",
                                                 "gravidity": 1, "parity": 0}},
        "typing": {"id": new_id(), "fields": {"abo": "O", "rhd": "negative", "tested_on": _today()}},
        "confirm_not_duplicate": True,
    }


def screen_entry(pregnancy_id: str, woman_id: str) -> dict:
    return {"id": new_id(), "kind": "screen", "woman_id": woman_id, "pregnancy_id": pregnancy_id,
            "fields": {"sampled_at": _ago(30), "result": "negative"}}


def booking_ids(b: dict) -> list[str]:
    return [b[k]["id"] for k in ("woman", "pregnancy", "typing") if k in b]
