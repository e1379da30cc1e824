"""The camera way in, end to end in Chromium: a fake camera shows the card's QR code, the
vendored jsQR decoder in static/js/card-reader.js reads it, and the page shows the trust state."""
from __future__ import annotations

import os
import re
from pathlib import Path

import pytest
from werkzeug.security import generate_password_hash

from clinic.card.codec import make_card_text, qr_matrix
from clinic.signing.keys import ensure_facility_key, load_signing_key
from tests.card.histories import full_history
from tests.card.test_card_views import CONFIG, PASSWORD

pytestmark = pytest.mark.browser
CHROMIUM = os.environ.get("RHLEDGER_CHROMIUM", "/usr/bin/chromium")


def y4m_of_qr(text: str, path: Path, width=640, height=480, px=3, frames=20) -> None:
    """A short greyscale Y4M video (4:2:0) of the QR code on white, as a fake camera."""
    m = qr_matrix(text)
    n = len(m)
    y = bytearray([235]) * (width * height)
    x0, y0 = (width - n * px) // 2, (height - n * px) // 2
    for r, row in enumerate(m):
        for c, dark in enumerate(row):
            if dark:
                for dy in range(px):
                    start = (y0 + r * px + dy) * width + x0 + c * px
                    y[start:start + px] = b"\x10" * px
    chroma = bytes([128]) * ((width // 2) * (height // 2))
    with open(path, "wb") as f:
        f.write(f"YUV4MPEG2 W{width} H{height} F10:1 Ip A1:1 C420jpeg\n".encode())
        for _ in range(frames):
            f.write(b"FRAME\n" + bytes(y) + chroma + chroma)


@pytest.fixture()
def server(tmp_path):
    from clinic.web import create_app
    from tests.web.browser_fixtures import LiveServer, free_port
    d = tmp_path / "hospital"
    d.mkdir()
    (d / "config.toml").write_text(CONFIG.format(pw=generate_password_hash(PASSWORD, method="pbkdf2:sha256:1000")))
    ensure_facility_key(d, "DEMO-HOSPITAL")
    app = create_app(d)
    s = LiveServer(app, free_port())
    s.start()
    yield s, d
    s.stop()


def test_camera_reads_the_card_and_shows_it_trusted(server, tmp_path):
    if not Path(CHROMIUM).exists():
        pytest.skip(f"{CHROMIUM} is not installed")
    from playwright.sync_api import sync_playwright
    live, d = server
    w, p, e = full_history()
    text = make_card_text(w, p, e, key=load_signing_key(d), issue=2, issued_at="2026-11-20T12:00:00Z",
                          issuer_name="Demo District Hospital").text
    video = tmp_path / "camera.y4m"
    y4m_of_qr(text, video)
    args = ["--no-sandbox", "--disable-gpu", "--use-fake-ui-for-media-stream", "--use-fake-device-for-media-stream",
            f"--use-file-for-fake-video-capture={video}"]
    with sync_playwright() as pw:
        b = pw.chromium.launch(executable_path=CHROMIUM, headless=True, args=args)
        try:
            ctx = b.new_context(base_url=live.url)
            ctx.set_default_timeout(20000)
            ctx.grant_permissions(["camera"], origin=live.url)
            page = ctx.new_page()
            errors = []
            page.on("pageerror", lambda exc: errors.append(str(exc)))
            from tests.web.browser_fixtures import is_csp_violation
            page.on("console", lambda m: errors.append(m.text) if is_csp_violation(m.text) else None)
            page.goto("/signin")
            page.fill('input[name="username"]', "demo")
            page.fill('input[name="password"]', PASSWORD)
            with page.expect_navigation():
                page.click('button[type="submit"]')
            page.goto("/cards/")
            assert page.evaluate("document.activeElement.id") == "code"  # the scanner field is ready
            with page.expect_navigation(url=re.compile(r"/cards/read$")):
                page.click("#camera-start")
            assert page.get_attribute("[data-trust]", "data-trust") == "trusted"
            assert "Mara Kellin-Ostrova" in page.content()
            assert not errors, errors
        finally:
            b.close()
