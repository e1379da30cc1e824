"""Fixtures of the web tests: a fresh data directory with one facility and accounts, the app,
a signed-in client, and helpers that make records through the real store."""
from __future__ import annotations

import re
import uuid
from datetime import datetime, timedelta, timezone
from zoneinfo import ZoneInfo

import pytest
from werkzeug.security import generate_password_hash

from clinic.web import create_app

PASSWORD = "correct horse 7"
CONFIG = """
[facility]
id = "test-clinic"
name = "Hillside Test Clinic"
kind = "clinic"
timezone = "Africa/Nairobi"
district = "Test District"

[care]
profile = "bsh-2014"
rhd_negative_frequency = 0.15
maternal_blood_volume_ml = 5000

[[stock.products]]
name = "Anti-D 1500"
vial_iu = 1500
routes = ["IM", "IV"]

[[accounts]]
username = "mwangi"
display_name = "Midwife Test"
role = "midwife"
password_hash = "{mw}"

[[accounts]]
username = "officer"
display_name = "District Officer Test"
role = "district-officer"
password_hash = "{do}"

[[accounts]]
username = "okello"
display_name = "Clinician Test"
role = "clinician"
password_hash = "{mw}"
"""


@pytest.fixture(scope="session")
def password_hash():
    # pbkdf2 with few iterations: the tests sign in often.
    return generate_password_hash(PASSWORD, method="pbkdf2:sha256:1000")


@pytest.fixture
def data_dir(tmp_path, password_hash):
    d = tmp_path / "data"
    d.mkdir()
    (d / "config.toml").write_text(CONFIG.format(mw=password_hash, do=password_hash), encoding="utf-8")
    return d


@pytest.fixture
def app(data_dir):
    return create_app(data_dir, test_config={"TESTING": True})


@pytest.fixture
def anon(app):
    """A client that is not signed in."""
    return app.test_client()


def csrf_of(html: str) -> str:
    m = re.search(r'name="csrf-token" content="([^"]+)"', html)
    assert m, "page has no csrf-token meta"
    return m.group(1)


class Client:
    """A signed-in test client that sends the CSRF token with every write."""

    def __init__(self, flask_client, token):
        self.c = flask_client
        self.token = token

    def get(self, url, **kw):
        return self.c.get(url, **kw)

    def post(self, url, data=None, **kw):
        data = dict(data or {})
        data.setdefault("csrf_token", self.token)
        return self.c.post(url, data=data, **kw)

    def api(self, method, url, json=None, token=True):
        headers = {"X-CSRF-Token": self.token} if token else {}
        return self.c.open(url, method=method, json=json, headers=headers)


def sign_in(app, username="mwangi") -> Client:
    c = app.test_client()
    page = c.get("/signin").get_data(as_text=True)
    token = csrf_of(page)
    r = c.post("/signin", data={"username": username, "password": PASSWORD, "csrf_token": token})
    assert r.status_code == 302, r.get_data(as_text=True)
    with c.session_transaction() as sess:
        token = sess["csrf"]
    return Client(c, token)


@pytest.fixture
def client(app):
    return sign_in(app)


@pytest.fixture
def officer(app):
    return sign_in(app, "officer")


@pytest.fixture
def clinician(app):
    """A clinician: everything a midwife does, and the surveillance entries (MCA Doppler, FBS, IUT)."""
    return sign_in(app, "okello")


@pytest.fixture
def store(app):
    return app.extensions["rhledger"]["store"]


TZ = ZoneInfo("Africa/Nairobi")  # the test facility's time zone


def days_ago(n: int) -> str:
    """A date n days before today at the facility (local calendar day)."""
    return (datetime.now(TZ) - timedelta(days=n)).date().isoformat()


def at_ago(**kw) -> str:
    return (datetime.now(timezone.utc) - timedelta(**kw)).strftime("%Y-%m-%dT%H:%M:%SZ")


@pytest.fixture
def booked(store):
    """A woman at about 20 weeks, RhD negative, with a negative booking screen."""
    w = store.create("woman", {"name": "Amina Testcase", "birth_date": "1995-03-04", "phone": "0700 111 222",
                               "register_no": "T-001", "village": "Riverbend"},
                     by="mwangi", facility="test-clinic").record
    p = store.create("pregnancy", {"booked_on": days_ago(60), "lmp": days_ago(140), "status": "ongoing",
                                   "gravidity": 2, "parity": 1},
                     by="mwangi", facility="test-clinic", woman_id=w["id"]).record
    t = store.create("typing", {"abo": "O", "rhd": "negative", "tested_on": days_ago(59)},
                     by="mwangi", facility="test-clinic", pregnancy_id=p["id"]).record
    s = store.create("screen", {"sampled_at": at_ago(days=59), "result": "negative"},
                     by="mwangi", facility="test-clinic", pregnancy_id=p["id"]).record
    return {"woman": w, "pregnancy": p, "typing": t, "screen": s}


def new_id() -> str:
    return str(uuid.uuid4())
