"""An invented clinic for the security tests: one account per role, one record of every kind.

Everything is invented (the facility, the staff, the woman). The app runs against a fresh
data directory with a facility key, so cards and referral notes can be printed.
"""
from __future__ import annotations

import re
import time
import uuid
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone
from pathlib import Path

from clinic.accounts.roles import ROLES

PASSWORD = "sesame-street-42"
FACILITY = "sec-clinic"
TZ_NAME = "Africa/Nairobi"
CONFIG = f"""\
[facility]
id = "{FACILITY}"
name = "Invented Security Test Clinic"
kind = "clinic"
timezone = "{TZ_NAME}"
district = "Invented District"

[care]
profile = "bsh-2014"

[[stock.products]]
name = "Anti-D 1500"
vial_iu = 1500
routes = ["IM", "IV"]
"""
# User name of each role's account: the role itself.
USERS = {role: role for role in ROLES}


def at_ago(**kw) -> str:
    return (datetime.now(timezone.utc) - timedelta(**kw)).strftime("%Y-%m-%dT%H:%M:%SZ")


def day_ago(n: int) -> str:
    from zoneinfo import ZoneInfo

    return (datetime.now(ZoneInfo(TZ_NAME)) - timedelta(days=n)).date().isoformat()


# Valid fields of each kind (fresh values each call: dates relative to today).
def example(kind: str) -> dict:
    return {
        "woman": {"name": "Zuri Invented-Testcase", "birth_date": "1996-02-03", "phone": "0700 000 999",
                  "village": "Testridge", "register_no": "SEC-001", "address": "by the invented well"},
        "pregnancy": {"booked_on": day_ago(70), "lmp": day_ago(150), "status": "ongoing", "gravidity": 2,
                      "parity": 1},
        "typing": {"abo": "O", "rhd": "negative", "tested_on": day_ago(69), "lab": "Invented lab"},
        "partner_typing": {"rhd": "positive", "rhd_zygosity": "unknown"},
        "fetal_rhd": {"result": "positive", "sampled_on": day_ago(40), "lab": "Invented lab"},
        "screen": {"sampled_at": at_ago(days=69), "result": "negative", "lab": "Invented lab"},
        "event": {"event_kind": "abdominal-trauma", "occurred_at": at_ago(hours=5), "notes": "fell on a step"},
        "fmh": {"method": "kleihauer-betke", "sampled_at": at_ago(hours=4), "fetal_cells": 2, "cells_counted": 5000},
        "dose": {"given_at": at_ago(hours=3), "amount": 500, "unit": "IU", "route": "IM", "lot": "SEC-LOT-1",
                 "lot_expiry": "2031-01-31", "indication": "sensitising-event", "given_by": "Invented Midwife"},
        "doppler": {"measured_at": at_ago(hours=2), "mca_psv_cm_s": 30},
        "fbs": {"sampled_at": at_ago(hours=2), "hb_g_dl": 11.0},
        "iut": {"given_at": at_ago(hours=2), "volume_ml": 30},
        "birth": {"born_at": at_ago(hours=1), "outcome": "live-birth", "baby_rhd": "positive"},
        "referral": {"referred_on": day_ago(0), "to_facility": "Invented Referral Hospital",
                     "reason": "fetal medicine review", "question": "is an MCA Doppler needed?"},
        "stock": {"move": "received", "at": at_ago(days=10), "product": "Anti-D 1500", "vial_iu": 1500,
                  "lot": "SEC-LOT-1", "lot_expiry": "2031-01-31", "vials": 10, "notes": "invented delivery"},
    }[kind]


ENTRY_ORDER = ("typing", "partner_typing", "fetal_rhd", "screen", "event", "fmh", "dose", "doppler", "fbs",
               "iut", "referral", "birth")


@dataclass
class World:
    app: object
    data_dir: Path
    ids: dict = field(default_factory=dict)   # kind -> record id ("woman", "pregnancy", "typing", ...)

    @property
    def store(self):
        return self.app.extensions["rhledger"]["store"]

    @property
    def users(self):
        return self.app.extensions["rhledger"]["users"]

    @property
    def pid(self) -> str:
        return self.ids["pregnancy"]

    @property
    def wid(self) -> str:
        return self.ids["woman"]


def make_data_dir(root: Path) -> Path:
    from clinic.accounts.users import UserStore
    from clinic.signing.keys import ensure_facility_key

    d = root / "data"
    d.mkdir(parents=True)
    d.chmod(0o700)
    (d / "config.toml").write_text(CONFIG, encoding="utf-8")
    ensure_facility_key(d, FACILITY)
    users = UserStore(d)
    for role, name in USERS.items():
        users.add(name, role, display_name=f"Invented {role}", password=PASSWORD, by="test", now=time.time())
    return d


def fill(store, ids: dict, *, fields=example) -> dict:
    """One record of every kind (woman, pregnancy, each entry kind, a stock movement)."""
    w = store.create("woman", fields("woman"), by="midwife", facility=FACILITY).record
    p = store.create("pregnancy", fields("pregnancy"), by="midwife", facility=FACILITY, woman_id=w["id"]).record
    ids.update(woman=w["id"], pregnancy=p["id"])
    for kind in ENTRY_ORDER:
        r = store.create(kind, fields(kind), by="clinician", facility=FACILITY, pregnancy_id=p["id"]).record
        ids[kind] = r["id"]
    ids["stock"] = store.create("stock", fields("stock"), by="midwife", facility=FACILITY).record["id"]
    return ids


def make_world(root: Path, **config) -> World:
    from clinic.web import create_app

    d = make_data_dir(root)
    app = create_app(d, test_config={"TESTING": True, **config})
    world = World(app, d)
    fill(world.store, world.ids)
    return world


def csrf_of(html: str) -> str:
    m = re.search(r'name="csrf-token" content="([^"]+)"', html)
    assert m, "page has no csrf-token meta"
    return m.group(1)


class Client:
    """A test client, signed in as ``username`` (or not at all), sending the CSRF token."""

    def __init__(self, app, username: str | None = None, password: str = PASSWORD):
        self.c = app.test_client()
        self.username = username
        self.token = csrf_of(self.c.get("/signin").get_data(as_text=True))
        if username:
            r = self.c.post("/signin", data={"username": username, "password": password, "csrf_token": self.token})
            assert r.status_code == 302, (username, r.status_code, r.get_data(as_text=True)[-500:])
            with self.c.session_transaction() as s:
                self.token = s["csrf"]

    def open(self, method: str, url: str, **kw):
        """The response, read and closed (static files are streamed)."""
        r = self._open(method, url, **kw)
        r.get_data()
        r.close()
        return r

    def _open(self, method: str, url: str, *, form=None, json=None, files=None, token: bool | str = True):
        headers = {}
        tok = self.token if token is True else (token or None)
        if json is not None:
            if tok:
                headers["X-CSRF-Token"] = tok
            return self.c.open(url, method=method, json=json, headers=headers)
        data = dict(form or {})
        if files:
            data.update(files)
        if tok and method not in ("GET", "HEAD"):
            data.setdefault("csrf_token", tok)
        kw = {"data": data} if method not in ("GET", "HEAD") else ({"query_string": data} if data else {})
        if files:
            kw["content_type"] = "multipart/form-data"
        return self.c.open(url, method=method, **kw)

    def get(self, url, **kw):
        return self.open("GET", url, **kw)


def new_id() -> str:
    return str(uuid.uuid4())
