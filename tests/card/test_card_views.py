"""The card pages: read by scanner text, by photo, import, print; sign-in and CSRF required."""
from __future__ import annotations

import io
import re

import pytest
from werkzeug.security import generate_password_hash

from clinic.card.codec import make_card_text
from clinic.signing.keys import ensure_facility_key, load_signing_key
from tests.card.histories import full_history, put_in_store

PASSWORD = "demo-pass-1234"
CONFIG = """
[facility]
id = "DEMO-HOSPITAL"
name = "Demo District Hospital"
kind = "hospital"
phone = "+000 555 0200"
timezone = "Africa/Nairobi"

[care]
profile = "bsh-2014"

[[accounts]]
username = "demo"
display_name = "Demo Midwife"
role = "midwife"
password_hash = "{pw}"

[[accounts]]
username = "officer"
display_name = "Demo Officer"
role = "district-officer"
password_hash = "{pw}"
"""


@pytest.fixture()
def app(tmp_path):
    from clinic.web import create_app
    d = tmp_path / "hospital"
    d.mkdir()
    (d / "config.toml").write_text(CONFIG.format(pw=generate_password_hash(PASSWORD, method="pbkdf2:sha256:1000")))
    ensure_facility_key(d, "DEMO-HOSPITAL")
    return create_app(d, test_config={"TESTING": True})


def sign_in(app, user="demo"):
    c = app.test_client()
    page = c.get("/signin").get_data(as_text=True)
    token = re.search(r'name="csrf-token" content="([^"]+)"', page).group(1)
    r = c.post("/signin", data={"username": user, "password": PASSWORD, "csrf_token": token})
    assert r.status_code == 302
    with c.session_transaction() as s:
        return c, s["csrf"]


@pytest.fixture()
def card_text(app):
    w, p, e = full_history()
    key = load_signing_key(app.config["DATA_DIR"])
    return make_card_text(w, p, e, key=key, issue=2, issued_at="2026-11-20T12:00:00Z",
                          issuer_name="Demo District Hospital").text


@pytest.mark.parametrize("url", ["/cards/", "/cards/pregnancy/x/card.pdf"])
def test_card_pages_need_sign_in(app, url):
    r = app.test_client().get(url)
    assert r.status_code == 302 and "/signin" in r.headers["Location"]


def test_reader_page_has_a_focused_scanner_field_and_the_local_decoder(app):
    c, _ = sign_in(app)
    html = c.get("/cards/").get_data(as_text=True)
    assert re.search(r'<input id="code" name="code" autofocus', html)
    assert "vendor/jsqr/jsQR.js" in html and "js/card-reader.js" in html
    for path in ("/static/vendor/jsqr/jsQR.js", "/static/js/card-reader.js"):
        r = c.get(path)
        try:
            assert r.status_code == 200
        finally:
            r.close()


def test_scanner_text_with_enter_and_lower_case_reads_trusted(app, card_text):
    c, tok = sign_in(app)
    r = c.post("/cards/read", data={"code": card_text.lower() + "\r\n", "csrf_token": tok})
    html = r.get_data(as_text=True)
    assert r.status_code == 200 and 'data-trust="trusted"' in html and "Issued by a trusted facility" in html
    assert "Mara Kellin-Ostrova" in html and "Import into this facility" in html
    assert "Decision support only" in html


def test_empty_and_bad_text_are_refused_with_a_reason(app):
    c, tok = sign_in(app)
    r = c.post("/cards/read", data={"code": "  ", "csrf_token": tok})
    assert r.status_code == 422 and "Nothing was read" in r.get_data(as_text=True)
    r = c.post("/cards/read", data={"code": "HELLO", "csrf_token": tok})
    assert r.status_code == 422 and 'data-trust="unreadable"' in r.get_data(as_text=True)


def test_missing_csrf_token_is_refused(app, card_text):
    c, _ = sign_in(app)
    assert c.post("/cards/read", data={"code": card_text}).status_code == 403


def test_photo_upload_is_decoded_on_the_server(app, card_text):
    from clinic.card import printing
    from clinic.card.view import build_view
    w, p, e = full_history()
    v = build_view(w, p, e, issuer={"name": "x"}, issue=2, issued_at="2026-11-20T12:00:00Z", qr_text=card_text)
    png = printing.card_png(v, dpi=150)
    c, tok = sign_in(app)
    r = c.post("/cards/photo", data={"photo": (io.BytesIO(png), "card.png"), "csrf_token": tok},
               content_type="multipart/form-data")
    assert r.status_code == 200 and 'data-trust="trusted"' in r.get_data(as_text=True)
    r = c.post("/cards/photo", data={"photo": (io.BytesIO(b"not an image"), "x.png"), "csrf_token": tok},
               content_type="multipart/form-data")
    assert r.status_code == 422 and "not an image" in r.get_data(as_text=True)


def test_import_creates_then_finds_nothing_new(app, card_text):
    c, tok = sign_in(app)
    r = c.post("/cards/import", data={"code": card_text, "csrf_token": tok})
    assert r.status_code == 302 and "/pregnancies/" in r.headers["Location"]
    store = app.extensions["rhledger"]["store"]
    assert len(store.pregnancies()) == 1
    c.post("/cards/import", data={"code": card_text, "csrf_token": tok})
    assert len(store.pregnancies()) == 1 and len(store.women_of()) == 1


def test_district_officer_may_read_but_not_import(app, card_text):
    c, tok = sign_in(app, "officer")
    r = c.post("/cards/read", data={"code": card_text, "csrf_token": tok})
    assert "Import into this facility" not in r.get_data(as_text=True)
    assert c.post("/cards/import", data={"code": card_text, "csrf_token": tok}).status_code == 403


def test_print_routes_give_pdf_png_and_sheet(app):
    store = app.extensions["rhledger"]["store"]
    w, p, e = full_history()
    put_in_store(store, (w, p, e), facility="DEMO-HOSPITAL")
    c, tok = sign_in(app)
    # Issue 16: showing the card page issues nothing; the card is issued by the page's POST.
    first = c.get(f"/cards/pregnancy/{p['id']}")
    assert first.status_code == 200 and "No card has been issued" in first.get_data(as_text=True)
    assert c.get(f"/cards/pregnancy/{p['id']}/card.pdf").status_code == 409
    assert c.post(f"/cards/pregnancy/{p['id']}", data={"csrf_token": tok}).status_code == 302
    page = c.get(f"/cards/pregnancy/{p['id']}")
    assert page.status_code == 200 and "Issue <b>1</b>" in page.get_data(as_text=True)
    pdf = c.get(f"/cards/pregnancy/{p['id']}/card.pdf")
    assert pdf.status_code == 200 and pdf.mimetype == "application/pdf" and pdf.data[:4] == b"%PDF"
    png = c.get(f"/cards/pregnancy/{p['id']}/card.png?download=1")
    assert png.mimetype == "image/png" and "attachment" in png.headers["Content-Disposition"]
    assert c.get(f"/cards/pregnancy/{p['id']}/sheet.pdf").data[:4] == b"%PDF"
    assert c.get(f"/cards/pregnancy/{p['id']}/referral.pdf").status_code == 404  # no referral recorded
    assert c.get("/cards/pregnancy/not-a-pregnancy").status_code == 404
