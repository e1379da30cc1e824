"""The headers are on every response: a strict CSP (no inline script or style), nosniff,
frame-ancestors 'none', no referrer; Cache-Control no-store on everything that may show a
patient (every answer but the versioned static files)."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from tests.security.test_role_table import CASES, _call
from tests.security.world import Client, make_world

TEMPLATES = Path(__file__).resolve().parents[2] / "clinic" / "web" / "templates"
CARD_READER_PAGES = ("/cards/", "/cards/read", "/cards/photo")
STATIC_JS = Path(__file__).resolve().parents[2] / "static" / "js"


def _csp(value: str) -> dict[str, str]:
    return {d.split()[0]: d.split(" ", 1)[1] if " " in d else "" for d in (x.strip() for x in value.split(";")) if d}


def check_headers(r, path: str) -> list[str]:
    h = r.headers
    out = []
    csp = _csp(h.get("Content-Security-Policy", ""))
    if not csp:
        return [f"{path}: no Content-Security-Policy"]
    for directive in ("script-src", "style-src"):
        if "'unsafe-inline'" in csp.get(directive, "") or "'unsafe-eval'" in csp.get(directive, ""):
            out.append(f"{path}: {directive} allows inline")
    # The card reader's pages, and only they, may also compile WebAssembly (its QR decoder).
    script_src = "'self' 'wasm-unsafe-eval'" if path in CARD_READER_PAGES else "'self'"
    if csp.get("script-src") != script_src or csp.get("style-src") != "'self'":
        out.append(f"{path}: script-src is not {script_src} or style-src not 'self' only: {csp}")
    if csp.get("frame-ancestors") != "'none'" or csp.get("object-src") != "'none'":
        out.append(f"{path}: frame-ancestors/object-src not 'none'")
    if h.get("X-Content-Type-Options") != "nosniff":
        out.append(f"{path}: no X-Content-Type-Options nosniff")
    if h.get("Referrer-Policy") != "no-referrer":
        out.append(f"{path}: Referrer-Policy is {h.get('Referrer-Policy')!r}")
    cache = h.get("Cache-Control", "")
    if not path.startswith("/static/") and path not in ("/sw.js", "/manifest.webmanifest") and "no-store" not in cache:
        out.append(f"{path}: Cache-Control is {cache!r}, not no-store")
    return out


@pytest.mark.parametrize("who", [None, "clinician", "district-officer", "admin"], ids=lambda w: w or "anonymous")
def test_every_route_answers_with_the_headers(tmp_path, who):
    world = make_world(tmp_path)
    client = Client(world.app, who)
    wrong = []
    for case in CASES:
        if case.ends_session and who:
            client = Client(world.app, who)
        r = _call(client, case, world)
        wrong += check_headers(r, r.request.path)
    assert not wrong, "\n".join(wrong)


def test_errors_and_unknown_addresses_carry_the_headers_too(tmp_path):
    world = make_world(tmp_path)
    c = Client(world.app, "midwife")
    wrong = []
    for method, url in (("GET", "/no/such/page"), ("GET", "/api/v1/records/nope"), ("DELETE", "/api/v1/records/x"),
                        ("GET", "/pregnancies/nope"), ("GET", "/static/nothing.css")):
        r = c.open(method, url)
        assert r.status_code in (404, 405), (url, r.status_code)
        wrong += check_headers(r, url)
    assert not wrong, "\n".join(wrong)


def test_pages_that_show_a_patient_are_not_stored(tmp_path):
    world = make_world(tmp_path)
    c = Client(world.app, "midwife")
    for url in (f"/pregnancies/{world.pid}", f"/women/{world.wid}", "/", "/find?q=Zuri",
                f"/api/v1/pregnancies/{world.pid}", f"/cards/pregnancy/{world.pid}/card.pdf",
                "/district/follow-up", "/district/report.follow-up"):
        assert "no-store" in c.get(url).headers["Cache-Control"], url


def test_no_template_or_script_has_inline_script_style_or_handlers():
    """What the CSP would refuse, caught before a browser sees it (printables/ are for WeasyPrint)."""
    wrong = []
    for path in TEMPLATES.rglob("*.html"):
        text = path.read_text(encoding="utf-8")
        rel = path.relative_to(TEMPLATES)
        if re.search(r"<style\b", text):
            wrong.append(f"{rel}: <style> element")
        for m in re.finditer(r"<script\b([^>]*)>", text):
            if "src=" not in m.group(1):
                wrong.append(f"{rel}: inline <script>")
        if re.search(r"\sstyle\s*=", text):
            wrong.append(f"{rel}: style attribute")
        if re.search(r"\son[a-z]+\s*=", text):
            wrong.append(f"{rel}: inline event handler")
        if "javascript:" in text:
            wrong.append(f"{rel}: javascript: URL")
    for path in STATIC_JS.rglob("*.js"):
        text = path.read_text(encoding="utf-8")
        if re.search(r"setAttribute\(\s*[\"']style|\.innerHTML\s*=|\beval\(|new Function\(", text):
            wrong.append(f"static/js/{path.name}: sets style attributes, innerHTML or evaluates text")
    assert not wrong, "\n".join(wrong)


def test_server_drawn_charts_use_no_style_attributes(tmp_path):
    from clinic.reports import charts as report_charts  # noqa: F401 - the district trend charts
    from clinic.web import charts

    svg = str(charts.titre_chart([(140, 4, "anti-D"), (161, 16, "anti-D")]))
    svg += str(charts.mca_chart([(150, 30.0), (170, 40.0)], lambda d: 0.2 * d, [(1.0, "1.0 MoM", "mom-median"),
                                                                                 (1.5, "1.5", "mom-severe")]))
    assert "<svg" in svg and "style=" not in svg
    world = make_world(tmp_path)
    html = Client(world.app, "clinician").get("/district/").get_data(as_text=True)
    assert "<svg" in html and "style=" not in html
