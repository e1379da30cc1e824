"""Sessions end when idle (15 minutes by default, configurable), on sign-out and on a switch of
staff; an old session cookie does not come back; an admin's reset ends the person's sessions."""
from __future__ import annotations

from http.cookies import SimpleCookie

from tests.security.test_sign_in_lock_out import Clock
from tests.security.world import CONFIG, Client, make_data_dir


def _app(tmp_path, config_extra=""):
    from clinic.web import create_app

    d = make_data_dir(tmp_path)
    if config_extra:
        (d / "config.toml").write_text(CONFIG + config_extra, encoding="utf-8")
    clock = Clock()
    return create_app(d, test_config={"TESTING": True, "SECURITY_CLOCK": clock}), clock


def test_a_session_ends_after_15_minutes_without_use(tmp_path):
    app, clock = _app(tmp_path)
    c = Client(app, "midwife")
    clock.t += 14 * 60
    assert c.get("/stock").status_code == 200          # use keeps it alive
    clock.t += 14 * 60
    assert c.get("/api/v1/worklist").status_code == 200
    clock.t += 15 * 60 + 1
    r = c.get("/stock")
    assert r.status_code == 302 and "ended=idle" in r.headers["Location"]
    page = c.get(r.headers["Location"]).get_data(as_text=True)
    assert "signed out after 15 minutes without use" in page
    api = c.get("/api/v1/session")
    assert api.status_code == 401


def test_the_api_answers_401_with_the_reason_when_idle(tmp_path):
    app, clock = _app(tmp_path)
    c = Client(app, "midwife")
    clock.t += 16 * 60
    r = c.c.get("/api/v1/worklist")
    assert r.status_code == 401 and r.get_json() == {"error": "not signed in", "signin": "/signin", "reason": "idle"}


def test_the_outbox_asking_who_is_signed_in_is_not_use(tmp_path):
    """A phone whose outbox asks /api/v1/session every 15 s must still time out."""
    app, clock = _app(tmp_path)
    c = Client(app, "midwife")
    for _ in range(7):
        clock.t += 2 * 60
        assert c.get("/api/v1/session").status_code == 200
    clock.t += 2 * 60
    assert c.get("/api/v1/session").status_code == 401


def test_the_idle_time_is_configurable(tmp_path):
    app, clock = _app(tmp_path, "\n[security]\nidle_minutes = 5\n")
    c = Client(app, "midwife")
    clock.t += 4 * 60
    assert c.get("/stock").status_code == 200
    clock.t += 5 * 60 + 1
    assert c.get("/stock").status_code == 302
    page = Client(app, "midwife").get("/stock").get_data(as_text=True)
    assert '<meta name="idle-seconds" content="300">' in page  # the page ends itself too (session.js)


def test_a_bad_idle_setting_is_refused_with_its_range(tmp_path):
    import pytest

    from clinic.config import ConfigError

    with pytest.raises(ConfigError, match=r"security.idle_minutes 0 .*from 1 to 720"):
        _app(tmp_path, "\n[security]\nidle_minutes = 0\n")


def _cookie(client) -> str:
    return client.c.get_cookie("session").value


def test_sign_out_ends_the_session_and_its_cookie_does_not_come_back(tmp_path):
    app, clock = _app(tmp_path)
    c = Client(app, "midwife")
    old = _cookie(c)
    assert c.open("POST", "/signout", form={}).status_code == 302
    assert c.get("/api/v1/session").status_code == 401
    replay = app.test_client()
    replay.set_cookie("session", old)
    assert replay.get("/api/v1/session").status_code == 401


def test_switch_staff_signs_out_and_the_next_person_signs_in(tmp_path):
    app, clock = _app(tmp_path)
    c = Client(app, "midwife")
    page = c.get("/stock").get_data(as_text=True)
    assert 'action="/switch"' in page and "switch staff" in page
    r = c.open("POST", "/switch", form={})
    assert r.status_code == 302 and r.headers["Location"].endswith("/signin")
    assert "Invented midwife is signed out. Next person: sign in." in c.get("/signin").get_data(as_text=True)
    assert c.get("/api/v1/session").status_code == 401
    nurse = Client(app, "nurse")
    assert nurse.get("/api/v1/session").get_json()["user"]["username"] == "nurse"


def test_a_reset_ends_the_persons_sessions_and_asks_for_a_new_password(tmp_path):
    import re

    app, clock = _app(tmp_path)
    nurse = Client(app, "nurse")
    admin = Client(app, "admin")
    r = admin.open("POST", "/admin/users/nurse/reset", form={})
    otp = re.search(r"<code>([a-z0-9-]{19})</code>", r.get_data(as_text=True)).group(1)
    assert nurse.get("/api/v1/session").status_code == 401
    fresh = Client(app)
    r = fresh.open("POST", "/signin", form={"username": "nurse", "password": otp})
    assert r.status_code == 302 and r.headers["Location"].endswith("/account/password")
    with fresh.c.session_transaction() as s:
        fresh.token = s["csrf"]
    assert fresh.get("/stock").headers["Location"].endswith("/account/password")  # nothing else first
    assert fresh.get("/api/v1/worklist").status_code == 403
    r = fresh.open("POST", "/account/password", form={"current": otp, "new": "a brand new one",
                                                      "again": "a brand new one"})
    assert r.status_code == 302
    assert fresh.get("/stock").status_code == 200
    assert Client(app, "nurse", password="a brand new one").get("/stock").status_code == 200


def test_the_session_cookie_is_httponly_samesite_and_secure_under_lan(tmp_path):
    app, clock = _app(tmp_path)
    c = app.test_client()
    r = c.get("/signin")
    cookie = SimpleCookie(r.headers["Set-Cookie"])["session"]
    assert cookie["httponly"] and cookie["samesite"] in ("Lax", "Strict") and not cookie["secure"]
    from clinic.web import lan

    https, plain, _paths = lan.make_servers(app, "127.0.0.1", 0, app.config["DATA_DIR"], setup_port=0)
    r = app.test_client().get("/signin")
    assert SimpleCookie(r.headers["Set-Cookie"])["session"]["secure"]
