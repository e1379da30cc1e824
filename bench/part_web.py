"""Bytes a phone downloads: sign-in plus the first page, and the same again with the service
worker installed, driven by Chromium (Debian's /usr/bin/chromium through Playwright).

The app (demo site clinic-a) runs in this process under cheroot, the server ``serve --lan``
uses, behind a WSGI wrapper that counts, for every response, the bytes sent (status line,
headers, body) and the body's gzip size (level 6) when the response is text that a server
would compress (HTML, CSS, JS, JSON, SVG, the manifest) and was not compressed already.

* **first load**: a fresh browser profile opens /signin, signs in, lands on Today, and stays
  until the service worker is active and the network is quiet (the worker's install fetches
  its pre-cache then, so those bytes count too);
* **repeat load**: the cookies cleared (signed out), the same profile signs in again and lands
  on Today: what the network carries with the worker and its caches in place.

``*_served_kb`` is what went over the wire as the app serves today; ``*_kb`` counts the
compressed size where the app compresses or would (see bench/README.md for which).
"""
from __future__ import annotations

import gzip
import os
import threading
import time
from pathlib import Path

CHROMIUM = os.environ.get("RHLEDGER_CHROMIUM", "/usr/bin/chromium")
ARGS = ["--no-sandbox", "--disable-background-networking", "--disable-component-update", "--disable-gpu"]
DEMO_MIDWIFE = ("midwife", "midwife-demo")  # published demo sign-in (README)
TEXT_TYPES = ("text/", "application/javascript", "application/json", "image/svg+xml", "application/manifest+json")


class Counting:
    """WSGI middleware: what each response put on the wire."""

    def __init__(self, app):
        self.app = app
        self.rows: list[dict] = []
        self.lock = threading.Lock()

    def __call__(self, environ, start_response):
        row = {"path": environ.get("PATH_INFO", ""), "status": "", "head": 0, "body": 0, "gzip": None,
               "encoding": "", "type": ""}
        chunks: list[bytes] = []

        def start(status, headers, exc_info=None):
            row["status"] = status
            row["head"] = len(f"HTTP/1.1 {status}\r\n") + sum(len(k) + len(v) + 4 for k, v in headers) + 2
            h = {k.lower(): v for k, v in headers}
            row["type"] = h.get("content-type", "")
            row["encoding"] = h.get("content-encoding", "")
            return start_response(status, headers, exc_info)

        result = self.app(environ, start)
        try:
            for chunk in result:
                chunks.append(chunk)
                yield chunk
        finally:
            if hasattr(result, "close"):
                result.close()
            body = b"".join(chunks)
            row["body"] = len(body)
            if not row["encoding"] and row["type"].startswith(TEXT_TYPES) and body:
                row["gzip"] = len(gzip.compress(body, 6))
            with self.lock:
                self.rows.append(row)

    def take(self) -> list[dict]:
        with self.lock:
            rows, self.rows = self.rows, []
        return rows


def totals(rows: list[dict]) -> dict:
    served = sum(r["head"] + r["body"] for r in rows)
    compressed = sum(r["head"] + (r["gzip"] if r["gzip"] is not None else r["body"]) for r in rows)
    return {"requests": len(rows), "served_kb": round(served / 1000, 1), "compressed_kb": round(compressed / 1000, 1),
            "largest": sorted(((r["path"], r["body"]) for r in rows), key=lambda t: -t[1])[:5]}


def _sign_in(page, user: str, password: str) -> None:
    page.goto("/signin")
    page.fill('input[name="username"]', user)
    page.fill('input[name="password"]', password)
    with page.expect_navigation():
        page.click('button[type="submit"]')
    if "/signin" in page.url:
        raise RuntimeError("sign-in failed")


def _quiet(page, seconds: float = 1.5) -> None:
    page.wait_for_load_state("networkidle")
    time.sleep(seconds)


def run(root: Path, log) -> dict:
    from cheroot import wsgi
    from playwright.sync_api import sync_playwright

    from bench.serving import free_port
    from clinic.web import create_app
    from seed_demo.scenario import build_site

    if not Path(CHROMIUM).exists():
        raise RuntimeError(f"{CHROMIUM} is not installed (apt-get install chromium)")
    d = root / "demo-clinic-a"  # the card part may have built it already
    if not (d / "config.toml").exists():
        build_site(d, "clinic-a", force=True)
    user, password = DEMO_MIDWIFE
    counting = Counting(create_app(d))
    port = free_port()
    server = wsgi.Server(("127.0.0.1", port), counting, numthreads=8, shutdown_timeout=1, server_name="rhledger-bench")
    server.prepare()
    thread = threading.Thread(target=server.serve, daemon=True)
    thread.start()
    url = f"http://127.0.0.1:{port}"
    out: dict = {}
    try:
        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path=CHROMIUM, headless=True, args=ARGS)
            try:
                ctx = browser.new_context(base_url=url, service_workers="allow", viewport={"width": 360, "height": 780})
                ctx.set_default_timeout(30000)
                page = ctx.new_page()
                counting.take()
                _sign_in(page, user, password)
                page.evaluate("navigator.serviceWorker.ready.then(() => true)")
                _quiet(page)
                first = totals(counting.take())
                page.close()
                ctx.clear_cookies()
                page = ctx.new_page()
                _sign_in(page, user, password)
                _quiet(page)
                controlled = page.evaluate("navigator.serviceWorker.controller !== null")
                repeat = totals(counting.take())
                ctx.close()
            finally:
                browser.close()
    finally:
        server.stop()
        thread.join(timeout=10)
    out.update(first_load_kb=first["compressed_kb"], first_load_served_kb=first["served_kb"],
               first_load_requests=first["requests"], first_load_largest=first["largest"],
               repeat_load_kb=repeat["compressed_kb"], repeat_load_served_kb=repeat["served_kb"],
               repeat_load_requests=repeat["requests"], repeat_controlled_by_worker=controlled)
    log(f"  web: first load {first['served_kb']:.0f} KB served ({first['compressed_kb']:.0f} KB compressed, "
        f"{first['requests']} requests); repeat {repeat['served_kb']:.0f} KB ({repeat['requests']} requests)")
    return out
