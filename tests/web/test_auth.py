"""Sign-in, the session rule (every page needs one), roles and the CSRF token."""
from __future__ import annotations

import pytest

from tests.web.conftest import PASSWORD, csrf_of

PAGES = ["/", "/find", "/book", "/calc/", "/calc/mca", "/stock", "/women/x", "/pregnancies/x",
         "/pregnancies/x/add/dose", "/records/x/amend", "/records/x/void"]
API_GETS = ["/api/v1/session", "/api/v1/worklist", "/api/v1/women?q=a", "/api/v1/records/x",
            "/api/v1/pregnancies/x", "/api/v1/calc/units?amount=300&unit=ug"]


@pytest.mark.parametrize("url", PAGES)
def test_login_required_pages_redirect_to_sign_in(anon, url):
    r = anon.get(url)
    assert r.status_code == 302
    assert "/signin" in r.headers["Location"]


@pytest.mark.parametrize("url", API_GETS)
def test_login_required_api_answers_401_json(anon, url):
    r = anon.get(url)
    assert r.status_code == 401
    assert r.get_json()["error"] == "not signed in"


@pytest.mark.parametrize("method,url", [("POST", "/api/v1/records"), ("POST", "/api/v1/bookings"),
                                        ("PATCH", "/api/v1/records/x")])
def test_login_required_api_writes_answer_401(anon, method, url):
    r = anon.open(url, method=method, json={})
    assert r.status_code == 401


@pytest.mark.parametrize("url", ["/signin", "/static/css/app.css", "/static/js/app.js"])
def test_public_urls_need_no_session(anon, url):
    with anon.get(url) as r:
        assert r.status_code == 200


def test_sign_in_with_right_password_lands_on_today(anon):
    token = csrf_of(anon.get("/signin").get_data(as_text=True))
    r = anon.post("/signin", data={"username": "mwangi", "password": PASSWORD, "csrf_token": token},
                  follow_redirects=True)
    assert r.status_code == 200
    html = r.get_data(as_text=True)
    assert "Today" in html and "Midwife Test" in html and "Hillside Test Clinic" in html


def test_sign_in_with_wrong_password_says_so(anon):
    token = csrf_of(anon.get("/signin").get_data(as_text=True))
    r = anon.post("/signin", data={"username": "mwangi", "password": "nope", "csrf_token": token})
    assert r.status_code == 401
    assert "User name or password is wrong" in r.get_data(as_text=True)


def test_sign_in_goes_back_to_the_page_asked_for(anon):
    token = csrf_of(anon.get("/signin").get_data(as_text=True))
    r = anon.post("/signin?next=/stock", data={"username": "mwangi", "password": PASSWORD, "csrf_token": token})
    assert r.headers["Location"].endswith("/stock")


def test_sign_in_never_redirects_off_site(anon):
    token = csrf_of(anon.get("/signin").get_data(as_text=True))
    r = anon.post("/signin?next=//evil.example/x", data={"username": "mwangi", "password": PASSWORD,
                                                       "csrf_token": token})
    assert r.headers["Location"] == "/"


def test_form_post_without_csrf_token_is_refused(client):
    r = client.c.post("/stock", data={"move": "received"})
    assert r.status_code == 403
    assert "security token" in r.get_data(as_text=True)


def test_api_write_without_csrf_header_is_refused(client):
    r = client.api("POST", "/api/v1/records", json={"kind": "woman", "fields": {}}, token=False)
    assert r.status_code == 403
    assert "token" in r.get_json()["error"]


def test_session_endpoint_gives_the_csrf_token(client):
    j = client.get("/api/v1/session").get_json()
    assert j["csrf_token"] == client.token
    assert j["user"]["username"] == "mwangi"


def test_sign_out_ends_the_session(client):
    r = client.post("/signout")
    assert r.status_code == 302
    assert client.get("/").status_code == 302


def test_role_required_district_officer_cannot_record(officer):
    r = officer.api("POST", "/api/v1/records", json={"kind": "woman", "fields": {"name": "X", "stated_age": 30}})
    assert r.status_code == 403
    assert "district-officer" in r.get_json()["error"]
    assert officer.get("/book").status_code == 403


def test_secret_key_is_kept_in_the_data_dir_owner_only(app, data_dir):
    key = data_dir / "secret_key"
    assert key.exists()
    assert oct(key.stat().st_mode & 0o777) == "0o600"
    assert app.config["SECRET_KEY"] == key.read_text().strip()
