"""The camera way in, end to end in Chromium: a fake camera shows the card's QR code, the
page's decoder in static/js/card-reader.js reads it, and the page shows the trust state.

The decoders come in a chain: the browser's own BarcodeDetector where there is one (Debian's
Chromium on Linux has none, so a stand-in checks that it comes first), ZXing as WebAssembly,
and jsQR when WebAssembly cannot run. After a few seconds without a card the page gives help
and the photo upload in one tap. The demo cards as a camera sees them are read in
test_camera_reads_demo_cards.py.
"""
from __future__ import annotations

import json
import re

import pytest
from werkzeug.security import generate_password_hash

from clinic.card.codec import make_card_text
from clinic.signing.keys import ensure_facility_key, load_signing_key
from clinic.web.headers import CSP
from tests.card.camera_frames import (
    camera_browser,
    desk_frame,
    qr_image,
    qr_video,
    read_with_camera,
    reader_page,
    write_y4m,
)
from tests.card.histories import full_history
from tests.card.test_card_views import CONFIG, PASSWORD
from tests.web.browser_fixtures import shot

pytestmark = pytest.mark.browser
WASM = "/static/vendor/zxing-wasm/zxing_reader.wasm"


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


@pytest.fixture()
def card_text(server):
    _, d = server
    w, p, e = full_history()
    return make_card_text(w, p, e, key=load_signing_key(d), issue=2, issued_at="2026-11-20T12:00:00Z",
                          issuer_name="Demo District Hospital").text


def _requests(page) -> list[str]:
    urls: list[str] = []
    page.on("request", lambda r: urls.append(r.url))
    return urls


def test_camera_reads_the_card_and_shows_it_trusted(server, card_text, tmp_path):
    live, _ = server
    video = qr_video(card_text, tmp_path / "camera.y4m")
    with camera_browser(video) as b:
        page = reader_page(b, live.url, "demo", PASSWORD)
        urls = _requests(page)
        page.goto("/cards/")
        assert page.evaluate("document.activeElement.id") == "code"  # the scanner field is ready
        with page.expect_navigation(url=re.compile(r"/cards/read$")):
            page.click("#camera-start")
        assert page.get_attribute("[data-trust]", "data-trust") == "trusted"
        assert "Mara Kellin-Ostrova" in page.content()
        assert not page.errors, page.errors
        assert not page.csp, page.csp
        # Debian's Chromium has no BarcodeDetector: ZXing read it, its .wasm from this server only.
        assert live.url + WASM in urls
        assert [u for u in urls if not u.startswith((live.url + "/", "data:", "blob:"))] == []


def test_without_webassembly_the_reader_falls_back_to_jsqr(server, card_text, tmp_path):
    live, _ = server
    video = qr_video(card_text, tmp_path / "camera.y4m")
    with camera_browser(video) as b:
        page = reader_page(b, live.url, "demo", PASSWORD, init_script="delete window.WebAssembly;")
        read = read_with_camera(page, timeout_ms=15000)
        assert read.fields["decoder"] == "jsqr" and read.fields["via"] == "camera"
        assert read.fields["code"] == card_text
        assert page.get_attribute("[data-trust]", "data-trust") == "trusted"
        assert not page.errors, page.errors
        assert not page.csp, page.csp


# A stand-in for the BarcodeDetector of Chrome on Android: it "finds" the given text in any
# video frame, or refuses every frame.
DETECTOR = """
window.BarcodeDetector = class {
  static getSupportedFormats() { return Promise.resolve(["ean_13", "qr_code"]); }
  constructor(options) { this.formats = options.formats; }
  detect(source) {
    window.detectedFrom = source.tagName;
    if (%(fail)s) { return Promise.reject(new DOMException("cannot decode", "NotSupportedError")); }
    return Promise.resolve(source.videoWidth ? [{format: "qr_code", rawValue: %(text)s}] : []);
  }
};
"""


def test_the_browsers_own_barcode_detector_comes_first_and_no_wasm_is_loaded(server, card_text, tmp_path):
    live, _ = server
    video = qr_video(card_text, tmp_path / "camera.y4m")
    with camera_browser(video) as b:
        page = reader_page(b, live.url, "demo", PASSWORD,
                           init_script=DETECTOR % {"fail": "false", "text": json.dumps(card_text)})
        urls = _requests(page)
        read = read_with_camera(page, timeout_ms=15000)
        assert read.fields["decoder"] == "barcode-detector" and read.fields["code"] == card_text
        assert page.get_attribute("[data-trust]", "data-trust") == "trusted"
        assert not [u for u in urls if u.endswith(".wasm")]
        assert not page.errors, page.errors
        assert not page.csp, page.csp


def test_a_detector_that_cannot_read_gives_way_to_zxing(server, card_text, tmp_path):
    live, _ = server
    video = qr_video(card_text, tmp_path / "camera.y4m")
    with camera_browser(video) as b:
        page = reader_page(b, live.url, "demo", PASSWORD,
                           init_script=DETECTOR % {"fail": "true", "text": json.dumps("")})
        read = read_with_camera(page, timeout_ms=15000)
        assert read.fields["decoder"] == "zxing-wasm" and read.fields["code"] == card_text
        assert not page.errors, page.errors
        assert not page.csp, page.csp


def test_nothing_found_brings_help_and_the_photo_in_one_tap(server, card_text, tmp_path):
    live, _ = server
    video = write_y4m([desk_frame(seed=k) for k in range(2)], tmp_path / "desk.y4m")
    photo = tmp_path / "card-photo.jpg"
    qr_image(card_text, px=6, margin=60).save(photo, "JPEG", quality=85)
    with camera_browser(video) as b:
        page = reader_page(b, live.url, "demo", PASSWORD)
        page.goto("/cards/")
        shot(page, "card-reader-360")
        page.click("#camera-start")
        page.wait_for_selector("#camera[data-state=looking]")
        assert page.is_hidden("#camera-help")
        page.wait_for_selector("#camera-help", state="visible", timeout=10000)  # after a few seconds
        help_text = page.inner_text("#camera-help")
        for tip in ("Move closer", "More light", "Hold it flat"):
            assert tip in help_text
        shot(page, "card-reader-help-360")
        with page.expect_file_chooser() as chooser:
            page.click("#camera-photo")
        assert page.is_hidden("#camera-video")  # the live camera is let go for the phone's camera app
        with page.expect_navigation(url=re.compile(r"/cards/photo$")):
            chooser.value.set_files(str(photo))
        assert page.get_attribute("[data-trust]", "data-trust") == "trusted"
        assert not page.errors, page.errors
        assert not page.csp, page.csp



def test_a_policy_that_refuses_webassembly_leaves_jsqr_to_read(server, card_text, tmp_path):
    """The reader's pages allow WebAssembly ('wasm-unsafe-eval', clinic/web/headers.py); should a
    policy refuse it, the reader still reads, with jsQR, and no error reaches the page."""
    live, _ = server
    video = qr_video(card_text, tmp_path / "camera.y4m")
    refusing = "; ".join(d for d in CSP.split("; ") if not d.startswith("script-src")) + "; script-src 'self'"

    def with_policy(route):
        response = route.fetch()
        assert "'wasm-unsafe-eval'" in response.headers["content-security-policy"]
        route.fulfill(response=response, headers={**response.headers, "content-security-policy": refusing})

    with camera_browser(video) as b:
        page = reader_page(b, live.url, "demo", PASSWORD, service_workers="block")
        page.route("**/cards/", with_policy)
        read = read_with_camera(page, timeout_ms=15000)
        assert read.fields["decoder"] == "jsqr" and read.fields["code"] == card_text
        assert page.get_attribute("[data-trust]", "data-trust") == "trusted"
        assert not page.errors, page.errors
        assert page.csp and all("WebAssembly" in m for m in page.csp), page.csp
