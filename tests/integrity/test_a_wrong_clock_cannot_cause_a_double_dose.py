"""A wrong clock cannot cause a double dose. The postpartum dose was given half an hour ago
(recorded while the laptop's clock was right); then the clock is set a day behind. The dose
still counts (the postpartum item stays done, with a clock warning), every page says the
clock is behind, amendments are never dated before what they change, and the session cookie
carries no expiry date a phone's clock could misread. The clocks are injected: the store's and
the planner's ``now=`` and the web's ``RHLEDGER_NOW``."""
from __future__ import annotations

import re
from datetime import timedelta

import pytest

from clinic.care_inputs import plan_from_settings
from clinic.web import create_app
from tests.conftest import FACILITY_ID, NOW, PASSWORD, USERNAME

BEHIND = NOW - timedelta(days=1)  # the laptop's clock, a day behind
BORN = NOW - timedelta(hours=100)
GIVEN = NOW - timedelta(minutes=30)


def _utc(dt):
    return dt.strftime("%Y-%m-%dT%H:%M:%SZ")


@pytest.fixture
def delivered(store):
    """Booked RhD negative; a birth (baby RhD positive) and the postpartum dose, entered on time."""
    def make(kind, fields, **kw):
        return store.create(kind, fields, by=USERNAME, facility=FACILITY_ID, now=NOW, **kw).record
    w = make("woman", {"name": "Clock Test Person", "birth_date": "1993-01-01"})
    p = make("pregnancy", {"booked_on": "2025-08-01", "lmp": "2025-06-16", "status": "ongoing",
                           "gravidity": 1, "parity": 0}, woman_id=w["id"])
    make("typing", {"abo": "O", "rhd": "negative", "tested_on": "2025-08-01"}, pregnancy_id=p["id"])
    make("screen", {"sampled_at": "2025-08-01T08:00:00Z", "result": "negative"}, pregnancy_id=p["id"])
    birth = make("birth", {"born_at": _utc(BORN), "outcome": "live-birth", "baby_rhd": "positive", "dat": "negative"},
                 pregnancy_id=p["id"])
    dose = make("dose", {"given_at": _utc(GIVEN), "amount": 1500, "unit": "IU", "route": "IM",
                         "product": "Anti-D 1500 IU (300 ug)", "lot": "L1", "lot_expiry": "2027-01-01",
                         "indication": "postpartum", "given_by": "Midwife Test",
                         "covers_id": birth["id"]}, pregnancy_id=p["id"])
    return {"pregnancy": p, "birth": birth, "dose": dose}


def _plan(store, pid, now):
    return plan_from_settings(store.settings, store.history(pid), now)


def test_the_dose_given_counts_with_the_clock_right(store, delivered):
    item = _plan(store, delivered["pregnancy"]["id"], NOW).item("postpartum-dose")
    assert item.state == "done" and item.done_record_id == delivered["dose"]["id"]


def test_with_the_clock_a_day_behind_the_dose_still_counts(store, delivered):
    plan = _plan(store, delivered["pregnancy"]["id"], BEHIND)
    item = plan.item("postpartum-dose")
    assert item.state == "done", f"postpartum dose shown as {item.state}: it would be given twice"
    assert item.done_record_id == delivered["dose"]["id"]
    warning = [a for a in plan.alerts if a.code == "clock-behind"]
    assert warning and delivered["dose"]["id"] in warning[0].record_ids
    assert "clock" in warning[0].message and warning[0].severity == "warning"


def test_no_clock_warning_when_the_clock_is_right(store, delivered):
    assert "clock-behind" not in {a.code for a in _plan(store, delivered["pregnancy"]["id"], NOW).alerts}


def test_amendments_are_never_dated_before_their_record(store, delivered):
    dose = delivered["dose"]
    amended = store.amend(dose["id"], {"lot": "L2"}, by=USERNAME, reason="lot retyped", now=BEHIND)
    assert amended["amended_at"] >= dose["created_at"]
    assert amended["amendments"][-1]["at"] >= dose["created_at"]
    voided = store.void(delivered["birth"]["id"], by=USERNAME, reason="wrong woman", now=BEHIND - timedelta(days=3))
    assert voided["amended_at"] >= delivered["birth"]["created_at"]
    lines = [a for a in store.audit(dose["id"]) if a["action"] == "amend"]
    assert lines[-1]["at"] >= dose["created_at"]


def test_the_store_knows_its_latest_change(store, delivered):
    assert store.latest_change() == _utc(NOW)


# ---- the web app: every page says the clock is behind ----------------------------------

def _signed_in(app):
    c = app.test_client()
    token = re.search(r'name="csrf-token" content="([^"]+)"', c.get("/signin").get_data(as_text=True)).group(1)
    r = c.post("/signin", data={"username": USERNAME, "password": PASSWORD, "csrf_token": token})
    assert r.status_code == 302
    return c, r


@pytest.fixture
def behind_app(data_dir, delivered):
    return create_app(data_dir, test_config={"TESTING": True, "RHLEDGER_NOW": BEHIND})


def test_every_page_says_the_clock_is_behind(behind_app, delivered):
    c, _ = _signed_in(behind_app)
    pid = delivered["pregnancy"]["id"]
    for url in ("/", "/find", f"/pregnancies/{pid}", "/calc/", "/cards/", "/signin"):
        html = c.get(url).get_data(as_text=True)
        assert 'class="clock-warning"' in html and "behind" in html, url
    page = c.get(f"/pregnancies/{pid}").get_data(as_text=True)
    assert "dated after now" in page  # the plan's own warning names the entries it still counts
    info = c.get("/api/v1/session").get_json()
    assert info["clock_warnings"] and "behind" in info["clock_warnings"][0]


def test_no_warning_when_the_clock_is_right(data_dir, delivered):
    app = create_app(data_dir, test_config={"TESTING": True, "RHLEDGER_NOW": NOW + timedelta(minutes=1)})
    c, _ = _signed_in(app)
    assert 'class="clock-warning"' not in c.get("/").get_data(as_text=True)


def test_a_phone_clock_ahead_of_the_laptop_is_reported(data_dir):
    app = create_app(data_dir, test_config={"TESTING": True, "RHLEDGER_NOW": NOW})
    c, _ = _signed_in(app)
    assert 'class="clock-warning"' not in c.get("/").get_data(as_text=True)
    info = c.get("/api/v1/session", headers={"X-Client-Time": _utc(NOW + timedelta(hours=5))}).get_json()
    assert any("phone" in w for w in info["clock_warnings"])
    assert "phone" in c.get("/").get_data(as_text=True)


def test_the_session_cookie_does_not_depend_on_the_clocks_agreeing(behind_app):
    _, r = _signed_in(behind_app)
    cookie = next(v for k, v in r.headers.items() if k == "Set-Cookie" and v.startswith("session="))
    assert "expires" not in cookie.lower() and "max-age" not in cookie.lower()
