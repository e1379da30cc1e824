"""Overriding a suggestion is a clinician's decision with a recorded reason: a dose the care
engine's plan does not support (more than the profile allows, for a woman managed as RhD
positive, after immune anti-D) is refused from a midwife or nurse, and needs the clinician's
reason; an ordinary dose needs neither."""
from __future__ import annotations

import pytest

from tests.security.world import FACILITY, Client, at_ago, day_ago, example, make_world, new_id


@pytest.fixture
def case(tmp_path):
    world = make_world(tmp_path)
    s = world.store
    w = s.create("woman", dict(example("woman"), name="Nadia Invented-Dose", register_no="SEC-002"),
                 by="midwife", facility=FACILITY).record
    p = s.create("pregnancy", example("pregnancy"), by="midwife", facility=FACILITY, woman_id=w["id"]).record
    s.create("typing", {"abo": "A", "rhd": "negative", "tested_on": day_ago(69)}, by="lab", facility=FACILITY,
             pregnancy_id=p["id"])
    s.create("screen", {"sampled_at": at_ago(days=69), "result": "negative"}, by="lab", facility=FACILITY,
             pregnancy_id=p["id"])
    ev = s.create("event", {"event_kind": "abdominal-trauma", "occurred_at": at_ago(hours=6)}, by="midwife",
                  facility=FACILITY, pregnancy_id=p["id"]).record
    return world, p["id"], ev["id"]


def dose(event_id, iu, **extra):
    return dict(example("dose"), amount=iu, covers_id=event_id, **extra)


def post(client, pid, fields):
    return client.open("POST", "/api/v1/records", json={"id": new_id(), "kind": "dose", "pregnancy_id": pid,
                                                        "fields": fields})


def test_an_ordinary_dose_is_recorded_by_a_midwife(case):
    world, pid, eid = case
    r = post(Client(world.app, "midwife"), pid, dose(eid, 500))
    assert r.status_code == 201, r.get_json()


@pytest.mark.parametrize("role", ["midwife", "nurse"])
def test_a_dose_above_what_the_plan_allows_is_refused_from_a_midwife_or_nurse(case, role):
    world, pid, eid = case
    r = post(Client(world.app, role), pid, dose(eid, 5000, override_reason="I think so"))
    assert r.status_code == 422
    msg = r.get_json()["errors"]["override_reason"]
    assert "more than the" in msg and "Only a clinician may record a dose the plan does not support" in msg
    assert not [e for e in world.store.entries(pid) if e["kind"] == "dose"]


def test_a_clinician_records_it_only_with_the_reason(case):
    world, pid, eid = case
    cl = Client(world.app, "clinician")
    r = post(cl, pid, dose(eid, 5000))
    assert r.status_code == 422 and r.get_json()["errors"]["override_reason"].startswith("is required:")
    r = post(cl, pid, dose(eid, 5000, override_reason="large FMH suspected clinically; Kleihauer to follow"))
    assert r.status_code == 201, r.get_json()
    rec = r.get_json()["record"]
    assert rec["override_reason"].startswith("large FMH") and rec["created_by"] == "clinician"


def test_raising_a_dose_by_amending_it_is_the_same_decision(case):
    world, pid, eid = case
    rec = post(Client(world.app, "midwife"), pid, dose(eid, 500)).get_json()["record"]
    mw = Client(world.app, "midwife")
    r = mw.open("PATCH", f"/api/v1/records/{rec['id']}", json={"changes": {"amount": 5000}, "reason": "typo",
                                                               "expected_version": 1})
    assert r.status_code == 422 and "override_reason" in r.get_json()["errors"]
    r = mw.open("POST", f"/records/{rec['id']}/amend", form={"_shown": "amount", "amount": "5000", "reason": "typo",
                                                             "expected_version": "1"})
    assert r.status_code == 422 and "Only a clinician" in r.get_data(as_text=True)
    assert world.store.get(rec["id"])["amount"] == 500


def test_the_entry_form_shows_the_refusal_beside_the_reason_field(case):
    world, pid, eid = case
    form = {k: str(v) for k, v in dose(eid, 5000).items()}
    form["given_at"] = at_ago(hours=1)[:16]
    r = Client(world.app, "midwife").open("POST", f"/pregnancies/{pid}/add/dose", form=form)
    html = r.get_data(as_text=True)
    assert r.status_code == 422
    assert 'data-error-for="override_reason"' in html and "Only a clinician may record" in html


def test_a_dose_for_a_woman_managed_as_rhd_positive_is_a_departure(case):
    world, pid, eid = case
    world.store.create("typing", {"abo": "A", "rhd": "positive", "tested_on": day_ago(1)}, by="lab",
                       facility=FACILITY, pregnancy_id=pid)
    r = post(Client(world.app, "midwife"), pid, dose(eid, 500))
    assert r.status_code == 422 and "RhD positive" in r.get_json()["errors"]["override_reason"]
