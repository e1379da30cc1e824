"""`rhledger serve` in a child process, and a small signed-in HTTP client for it (standard
library only), for the benchmark parts that measure over HTTP."""
from __future__ import annotations

import http.cookiejar
import json
import os
import re
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.parse
import urllib.request
from pathlib import Path

from bench.common import ROOT

SERVE = "import sys; from clinic.cli.main import cli; sys.exit(cli())"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Server:
    """`rhledger serve --data DIR --port P` until ``stop``."""

    def __init__(self, data_dir: Path, threads: int = 8, env: dict | None = None):
        self.data_dir = Path(data_dir)
        self.port = free_port()
        self.threads = threads
        self.env = dict(os.environ, PYTHONPATH=str(ROOT), **(env or {}))
        self.proc: subprocess.Popen | None = None

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def start(self, timeout: float = 120) -> Server:
        self.proc = subprocess.Popen(
            [sys.executable, "-c", SERVE, "serve", "--data", str(self.data_dir), "--port", str(self.port),
             "--threads", str(self.threads)],
            env=self.env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"rhledger serve exited: {self.proc.stderr.read().decode()[-2000:]}")
            try:
                with socket.create_connection(("127.0.0.1", self.port), timeout=0.5):
                    return self
            except OSError:
                time.sleep(0.1)
        self.stop()
        raise RuntimeError("rhledger serve did not start listening")

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        self.proc = None


class Client:
    """Cookies kept; ``signin`` posts the form with its CSRF token."""

    def __init__(self, base: str):
        self.base = base
        self.jar = http.cookiejar.CookieJar()
        self.opener = urllib.request.build_opener(urllib.request.HTTPCookieProcessor(self.jar))
        self.csrf = ""

    def request(self, method: str, path: str, body: bytes | None = None, headers: dict | None = None,
                timeout: float = 60) -> tuple[int, bytes]:
        req = urllib.request.Request(self.base + path, data=body, method=method, headers=headers or {})
        try:
            with self.opener.open(req, timeout=timeout) as resp:
                return resp.status, resp.read()
        except urllib.error.HTTPError as e:
            return e.code, e.read()

    def get(self, path: str) -> tuple[int, bytes]:
        return self.request("GET", path)

    def signin(self, user: str, password: str) -> None:
        status, page = self.get("/signin")
        m = re.search(rb'name="csrf_token" value="([^"]+)"', page)
        if status != 200 or not m:
            raise RuntimeError(f"no sign-in form ({status})")
        form = urllib.parse.urlencode({"csrf_token": m.group(1).decode(), "username": user,
                                       "password": password}).encode()
        status, page = self.request("POST", "/signin", form, {"Content-Type": "application/x-www-form-urlencoded"})
        if status != 200 or b'name="csrf-token"' not in page:
            raise RuntimeError(f"sign-in as {user} failed ({status})")
        status, body = self.get("/api/v1/session")
        self.csrf = json.loads(body).get("csrf_token", "")

    def post_json(self, path: str, obj) -> tuple[int, dict]:
        status, body = self.request("POST", path, json.dumps(obj).encode(),
                                    {"Content-Type": "application/json", "X-CSRF-Token": self.csrf})
        try:
            return status, json.loads(body or b"{}")
        except ValueError:
            return status, {"raw": body[:200].decode(errors="replace")}
