"""The audit trail names the signed-in person for every change; admins read it on a page with
filters by person, record and date, and with `rhledger audit`."""
from __future__ import annotations

import json
import re
from datetime import datetime, timedelta
from zoneinfo import ZoneInfo

from click.testing import CliRunner

from clinic.cli.main import cli
from tests.security.world import TZ_NAME, Client, example, make_world, new_id


def _changes(world):
    mw, nurse, cl = Client(world.app, "midwife"), Client(world.app, "nurse"), Client(world.app, "clinician")
    r = mw.open("POST", "/api/v1/records", json={"id": new_id(), "kind": "event", "pregnancy_id": world.pid,
                                                 "fields": example("event")})
    assert r.status_code == 201
    ev = r.get_json()["record"]
    r = nurse.open("PATCH", f"/api/v1/records/{ev['id']}", json={"changes": {"notes": "slipped"}, "reason": "detail",
                                                                 "expected_version": 1})
    assert r.status_code == 200
    r = cl.open("POST", f"/records/{ev['id']}/void", form={"reason": "entered twice"})
    assert r.status_code == 302
    r = nurse.open("POST", f"/pregnancies/{world.pid}/add/referral", form={
        "referred_on": example("referral")["referred_on"], "to_facility": "Invented Hospital", "reason": "titre"})
    assert r.status_code == 302
    return ev["id"]


def test_every_change_made_in_the_app_names_who_made_it(tmp_path):
    world = make_world(tmp_path)
    eid = _changes(world)
    lines = world.store.audit(record_id=eid)
    assert [(a["action"], a["by"]) for a in lines] == [("create", "midwife"), ("amend", "nurse"), ("void", "clinician")]
    assert world.store.audit()[-1]["by"] == "nurse" and world.store.audit()[-1]["kind"] == "referral"


def test_the_audit_page_filters_by_person_record_and_date(tmp_path):
    world = make_world(tmp_path)
    eid = _changes(world)
    admin = Client(world.app, "admin")
    html = admin.get("/admin/audit?by=nurse").get_data(as_text=True).split("Account events")[0]
    rows = re.findall(r"<tr><td>[^<]*</td><td>([^<]*)</td>", html)
    assert rows and set(rows) == {"nurse"}
    html = admin.get(f"/admin/audit?record={eid}").get_data(as_text=True)
    assert html.count(f"<code>{eid[:8]}</code>") == 3 and "notes: fell on a step → slipped" in html
    today = datetime.now(ZoneInfo(TZ_NAME)).date()
    assert "No changes match" in admin.get(f"/admin/audit?until={today - timedelta(days=1)}").get_data(as_text=True)
    assert "nurse" in admin.get(f"/admin/audit?since={today}&until={today}").get_data(as_text=True)
    r = admin.get("/admin/audit?since=yesterday")
    assert r.status_code == 400 and "since: &#39;yesterday&#39; is not a date" in r.get_data(as_text=True)


def test_the_audit_page_shows_account_events_by_whom(tmp_path):
    world = make_world(tmp_path)
    admin = Client(world.app, "admin")
    admin.open("POST", "/admin/users/nurse/reset", form={})
    html = admin.get("/admin/audit?by=admin").get_data(as_text=True)
    assert re.search(r"<td>admin</td><td>reset</td><td>nurse</td>", html)


def test_rhledger_audit_filters_the_same_way(tmp_path):
    world = make_world(tmp_path)
    eid = _changes(world)
    d = str(world.data_dir)
    res = CliRunner().invoke(cli, ["audit", "--data", d, "--by", "clinician", "--json"])
    assert res.exit_code == 0, res.output
    lines = json.loads(res.output)
    assert lines and {a["by"] for a in lines} == {"clinician"} and lines[0]["action"] == "void"
    res = CliRunner().invoke(cli, ["audit", "--data", d, "--record", eid])
    assert res.exit_code == 0 and len(res.output.strip().splitlines()) == 3 and "reason: entered twice" in res.output
    res = CliRunner().invoke(cli, ["audit", "--data", d, "--since", "2026-13-01"])
    assert res.exit_code == 1 and "since: '2026-13-01' is not a date" in res.output


def test_a_bundle_import_names_the_officer(tmp_path):
    from clinic.reports.bundle import export_bundle, import_bundle
    from clinic.store import Store
    from tests.reports import dataset as ds

    clinic = make_world(tmp_path / "clinic")
    d = tmp_path / "district"
    ds.write_config(d, ds.DISTRICT_ID, "Invented District", "district")
    ds.install_trust(d, {"sec-clinic": clinic.data_dir})
    b = export_bundle(clinic.store, clinic.data_dir, facility="sec-clinic", since="LAST")
    district = Store(d)
    res = import_bundle(district, d, b.path.read_bytes(), name="b.rhlb", by="district-officer")
    assert res.status == "imported", res.message
    lines = district.audit()
    assert lines and {a["by"] for a in lines} == {"district-officer"}
