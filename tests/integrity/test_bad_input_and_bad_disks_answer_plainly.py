"""The smaller holes of issue 16: bad input and bad disks answer in plain words, never a 500 or a
traceback; audit files are as private as the partitions; looking at a card page issues nothing.

- a lone surrogate in JSON input: 400 with a message; out-of-range dates in the calculators:
  refused like any other out-of-range input (422, naming the field), never a 500;
- a full disk and a read-only data folder: the store, the web app and the command line name
  the cause (injected at the os level: the tests run as root, which writes anywhere);
- audit files are 0600 like the partitions;
- a plain GET of a card page does not issue a card."""
from __future__ import annotations

import errno
import os
import re
import stat

import pytest
from click.testing import CliRunner

from clinic.cli.main import cli
from clinic.store import Store, StoreError
from clinic.web import create_app
from tests.conftest import FACILITY_ID, PASSWORD, USERNAME


def _signed_in(app):
    c = app.test_client()
    token = re.search(r'name="csrf-token" content="([^"]+)"', c.get("/signin").get_data(as_text=True)).group(1)
    assert c.post("/signin", data={"username": USERNAME, "password": PASSWORD, "csrf_token": token}).status_code == 302
    with c.session_transaction() as s:
        return c, s["csrf"]


@pytest.fixture
def app(data_dir):
    return create_app(data_dir, test_config={"TESTING": True})


# ---- a lone surrogate, dates out of range -------------------------------------------------

def test_a_lone_surrogate_in_json_answers_400(app):
    c, tok = _signed_in(app)
    body = '{"kind": "woman", "fields": {"name": "Ami\\ud800na", "stated_age": 25}}'
    r = c.post("/api/v1/records", data=body, content_type="application/json", headers={"X-CSRF-Token": tok})
    assert r.status_code == 400, r.get_data(as_text=True)
    assert "name" in r.get_json()["error"] and "broken character" in r.get_json()["error"]
    w = app.extensions["rhledger"]["store"].create("woman", {"name": "Amina", "stated_age": 25}, by=USERNAME,
                                                   facility=FACILITY_ID).record
    reason = '{"changes": {"village": "X"}, "reason": "typo \\udc80", "expected_version": 1}'
    r = c.open(f"/api/v1/records/{w['id']}", method="PATCH", data=reason, content_type="application/json",
               headers={"X-CSRF-Token": tok})
    assert r.status_code == 400 and "reason" in r.get_json()["error"]


@pytest.mark.parametrize("query", ["lmp=9999-12-01", "lmp=0001-01-02", "lmp=2026-01-01&booked_on=9999-12-31",
                                   "edd=9999-12-31"])
def test_dates_out_of_range_in_the_calculators_are_refused_not_500(app, query):
    c, _ = _signed_in(app)
    api = c.get(f"/api/v1/calc/dating?{query}")
    assert api.status_code == 422, api.get_data(as_text=True)
    assert any("1900-01-01 to 2199-12-31" in m or "outside" in m for m in api.get_json()["errors"].values())
    page = c.get(f"/calc/dating?{query}")
    assert page.status_code == 422 and "2199-12-31" in page.get_data(as_text=True)


# ---- full disk, read-only folder ------------------------------------------------------------

def _fail_writes(monkeypatch, under, code):
    """Every write under ``under`` fails with ``code``: open for writing refused (read-only) or
    each write call refused (full)."""
    real_open = os.open
    under = str(under)

    def fake_open(path, flags, *a, **kw):
        if str(path).startswith(under) and flags & (os.O_WRONLY | os.O_RDWR | os.O_CREAT):
            raise OSError(code, os.strerror(code), str(path))
        return real_open(path, flags, *a, **kw)

    def fake_write(fd, data):
        raise OSError(code, os.strerror(code))

    if code == errno.ENOSPC:
        monkeypatch.setattr(os, "write", fake_write)
    monkeypatch.setattr(os, "open", fake_open)


@pytest.mark.parametrize("code, words", [(errno.ENOSPC, "is full"), (errno.EROFS, "cannot be written")])
def test_the_store_names_the_cause(store, now, monkeypatch, data_dir, code, words):
    _fail_writes(monkeypatch, data_dir, code)
    with pytest.raises(StoreError, match=words):
        store.create("woman", {"name": "Disk Test", "stated_age": 30}, by=USERNAME, facility=FACILITY_ID, now=now)
    monkeypatch.undo()
    assert store.women_of() == [] and Store(data_dir).check().ok  # nothing half-written


@pytest.mark.parametrize("code, words", [(errno.ENOSPC, "is full"), (errno.EROFS, "cannot be written")])
def test_the_web_app_answers_in_plain_words(app, data_dir, monkeypatch, code, words):
    c, tok = _signed_in(app)
    _fail_writes(monkeypatch, data_dir, code)
    r = c.post("/api/v1/records", json={"kind": "woman", "fields": {"name": "Disk Test", "stated_age": 30}},
               headers={"X-CSRF-Token": tok})
    assert r.status_code == 503 and words in r.get_json()["error"]


def test_start_up_on_a_read_only_folder_says_so_without_a_traceback(data_dir, monkeypatch):
    _fail_writes(monkeypatch, data_dir, errno.EROFS)
    res = CliRunner().invoke(cli, ["serve", "--data", str(data_dir)])
    assert res.exit_code == 1
    assert "cannot be written" in res.output and "Traceback" not in res.output
    res = CliRunner().invoke(cli, ["list", "--data", str(data_dir)])
    assert res.exit_code == 1 and "cannot be written" in res.output


def test_start_up_on_a_full_disk_says_so(data_dir, monkeypatch):
    Store(data_dir)  # an existing store; the daily backup at start-up is what cannot be written
    _fail_writes(monkeypatch, data_dir, errno.ENOSPC)
    res = CliRunner().invoke(cli, ["serve", "--data", str(data_dir)])
    assert res.exit_code == 1 and "is full" in res.output and "Traceback" not in res.output


# ---- file modes, card pages ---------------------------------------------------------------------

def test_audit_files_are_0600_like_the_partitions(store, woman, data_dir):
    audit = list((data_dir / "audit").rglob("*.jsonl"))
    parts = list((data_dir / "records").rglob("*.json"))
    index = data_dir / "records" / "index.log"
    assert audit and parts
    for p in audit + parts + [index]:
        assert stat.S_IMODE(p.stat().st_mode) == 0o600, p


def test_a_plain_get_of_a_card_page_issues_no_card(data_dir, pregnancy):
    from clinic.card.issue import issued
    from clinic.signing.keys import ensure_facility_key

    ensure_facility_key(data_dir, FACILITY_ID)
    app = create_app(data_dir, test_config={"TESTING": True})
    c, tok = _signed_in(app)
    page = c.get(f"/cards/pregnancy/{pregnancy['id']}")
    assert page.status_code == 200 and "Issue her card" in page.get_data(as_text=True)
    for url in ("", "/card.pdf", "/card.png", "/sheet.pdf"):
        c.get(f"/cards/pregnancy/{pregnancy['id']}{url}")
    assert issued(data_dir, pregnancy["id"]) == []
    assert c.post(f"/cards/pregnancy/{pregnancy['id']}", data={"csrf_token": tok}).status_code == 302
    assert len(issued(data_dir, pregnancy["id"])) == 1
    assert c.get(f"/cards/pregnancy/{pregnancy['id']}/card.pdf").data[:4] == b"%PDF"
    assert len(issued(data_dir, pregnancy["id"])) == 1
