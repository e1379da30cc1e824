"""Fixtures for the browser tests (tests/web/test_browser_*.py import them).

A real server (cheroot, the same server `serve --lan` uses, here over plain HTTP on
127.0.0.1, which browsers treat as a secure context) runs in a thread against a fresh
data directory holding the demo scenario. It can be stopped and started again on the same
port, so "the laptop cannot be reached" is real, not only emulated. Chromium is Debian's
/usr/bin/chromium driven by Playwright; each test gets a new 360 px wide context.
Screenshots go to test-artifacts/screenshots/.
"""
from __future__ import annotations

import os
import socket
import threading
import time
from pathlib import Path

import pytest

CHROMIUM = os.environ.get("RHLEDGER_CHROMIUM", "/usr/bin/chromium")
CHROMIUM_ARGS = ["--no-sandbox", "--disable-background-networking", "--disable-component-update", "--disable-gpu"]
ROOT = Path(__file__).resolve().parents[2]
SHOTS = ROOT / "test-artifacts" / "screenshots"
PHONE = {"width": 360, "height": 780}
TIMEOUT_MS = 15000


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class LiveServer:
    """The app on http://127.0.0.1:<port>/, in a thread; stop() makes it unreachable."""

    def __init__(self, app, port: int):
        self.app = app
        self.port = port
        self.server = None
        self.thread = None

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    @property
    def store(self):
        return self.app.extensions["rhledger"]["store"]

    def start(self) -> None:
        from cheroot import wsgi

        self.server = wsgi.Server(("127.0.0.1", self.port), self.app, numthreads=8, shutdown_timeout=1,
                                  server_name="rhledger-test")
        deadline = time.monotonic() + 10
        while True:
            try:
                self.server.prepare()
                break
            except OSError:
                if time.monotonic() > deadline:
                    raise
                time.sleep(0.1)
        self.thread = threading.Thread(target=self.server.serve, name="rhledger-live", daemon=True)
        self.thread.start()

    def stop(self) -> None:
        if self.server is not None:
            self.server.stop()
            self.thread.join(timeout=10)
            assert not self.thread.is_alive(), "the test server did not stop"
            self.server = None


@pytest.fixture(scope="module")
def demo_site(tmp_path_factory):
    """A data directory with the invented demo scenario; (data_dir, summary)."""
    from seed_demo.scenario import build_site

    d = tmp_path_factory.mktemp("browser-data") / "data"
    summary = build_site(d, "clinic-a")
    return d, summary


@pytest.fixture(scope="module")
def live(demo_site):
    from clinic.web import create_app

    data_dir, summary = demo_site
    app = create_app(data_dir)
    server = LiveServer(app, free_port())
    server.start()
    server.summary = summary
    user, password, _role = next(a for a in summary["accounts"] if a[2] == "midwife")
    server.credentials = (user, password)
    yield server
    server.stop()


@pytest.fixture(scope="module")
def browser():
    if not Path(CHROMIUM).exists():
        pytest.skip(f"{CHROMIUM} is not installed (apt-get install chromium)")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture
def context(browser, live):
    ctx = browser.new_context(viewport=PHONE, base_url=live.url, service_workers="allow",
                              timezone_id=live.app.extensions["rhledger"]["settings"].timezone, locale="en-GB")
    ctx.set_default_timeout(TIMEOUT_MS)
    errors = []
    ctx.on("weberror", lambda e: errors.append(str(e.error)))
    ctx.page_errors = errors
    # The app's Content-Security-Policy forbids inline script, inline style and style attributes:
    # the browser reports each thing it refused on the console.
    csp = []
    ctx.on("console", lambda m: csp.append(f"{m.type}: {m.text}") if is_csp_violation(m.text) else None)
    ctx.csp_violations = csp
    yield ctx
    ctx.close()
    assert not errors, f"JavaScript errors on the pages: {errors}"
    assert not csp, f"Content-Security-Policy violations on the pages: {csp}"


def is_csp_violation(text: str) -> bool:
    return "Content Security Policy" in text or "Content-Security-Policy" in text


@pytest.fixture
def page(context):
    return context.new_page()


def shot(page, name: str) -> Path:
    SHOTS.mkdir(parents=True, exist_ok=True)
    path = SHOTS / f"{name}.png"
    page.screenshot(path=str(path), full_page=True)
    return path


def sign_in(page, live) -> None:
    user, password = live.credentials
    page.goto("/signin")
    page.fill('input[name="username"]', user)
    page.fill('input[name="password"]', password)
    with page.expect_navigation():
        page.click('button[type="submit"]')
    assert "/signin" not in page.url, "sign-in failed"


def wait_for_worker(page) -> None:
    """Until the service worker controls the page. It claims open pages when it activates, but
    a page whose navigation started before that stays uncontrolled until it loads again."""
    page.evaluate("navigator.serviceWorker.ready.then(() => true)")
    if not page.evaluate("navigator.serviceWorker.controller !== null"):
        page.reload()
    try:
        page.wait_for_function("navigator.serviceWorker && navigator.serviceWorker.controller !== null")
    except Exception as e:  # noqa: BLE001 - add what the browser knows, then fail
        state = page.evaluate("""navigator.serviceWorker.getRegistration().then(r => r ? {
            active: r.active && r.active.state, waiting: r.waiting && r.waiting.state,
            installing: r.installing && r.installing.state} : null)""")
        raise AssertionError(f"no service worker controls {page.url}: registration {state}; "
                             f"net-state: {page.get_attribute('#net-state', 'title')}") from e


def outbox_entries(page) -> list[dict]:
    return page.evaluate("rhOutbox.list()")
