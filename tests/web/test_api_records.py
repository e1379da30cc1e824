"""POST /api/v1/records (idempotent by id), GET and PATCH /api/v1/records/<id>."""
from __future__ import annotations

from tests.web.conftest import at_ago, days_ago, new_id


def _dose_fields(**kw):
    f = {"given_at": at_ago(hours=2), "amount": 1500, "unit": "IU", "route": "IM", "lot": "L-42",
         "lot_expiry": "2030-01-31", "indication": "routine-antenatal", "given_by": "Midwife Test"}
    f.update(kw)
    return f


def test_create_record_answers_201_with_record_and_redirect(client, booked):
    pid = booked["pregnancy"]["id"]
    rid = new_id()
    r = client.api("POST", "/api/v1/records", json={"id": rid, "kind": "dose", "pregnancy_id": pid,
                                                    "fields": _dose_fields()})
    assert r.status_code == 201, r.get_json()
    j = r.get_json()
    assert j["record"]["id"] == rid and j["record"]["dose_iu"] == 1500
    assert j["record"]["created_by"] == "mwangi"
    assert j["redirect"] == f"/pregnancies/{pid}#r-{rid}"


def test_idempotent_replay_same_id_and_fields_is_stored_once(client, booked, store):
    pid = booked["pregnancy"]["id"]
    body = {"id": new_id(), "kind": "dose", "pregnancy_id": pid, "fields": _dose_fields()}
    first = client.api("POST", "/api/v1/records", json=body)
    again = client.api("POST", "/api/v1/records", json=body)
    assert first.status_code == 201
    assert again.status_code == 200
    assert again.get_json()["replay"] is True
    assert again.get_json()["record"]["id"] == body["id"]
    doses = [e for e in store.entries(pid) if e["kind"] == "dose"]
    assert len(doses) == 1


def test_same_id_with_other_fields_is_a_409_conflict(client, booked):
    pid = booked["pregnancy"]["id"]
    body = {"id": new_id(), "kind": "dose", "pregnancy_id": pid, "fields": _dose_fields()}
    assert client.api("POST", "/api/v1/records", json=body).status_code == 201
    body["fields"] = _dose_fields(lot="OTHER")
    r = client.api("POST", "/api/v1/records", json=body)
    assert r.status_code == 409
    assert r.get_json()["current_version"] == 1


def test_validation_errors_name_the_field_and_range(clinician, booked):
    client = clinician  # an MCA Doppler is a clinician's entry
    r = client.api("POST", "/api/v1/records", json={
        "id": new_id(), "kind": "doppler", "pregnancy_id": booked["pregnancy"]["id"],
        "fields": {"measured_at": at_ago(hours=1), "mca_psv_cm_s": 400}})
    assert r.status_code == 422
    assert "mca_psv_cm_s" in r.get_json()["errors"]
    assert "5 to 150" in r.get_json()["errors"]["mca_psv_cm_s"]


def test_required_field_missing_is_named(client, booked):
    r = client.api("POST", "/api/v1/records", json={
        "kind": "dose", "pregnancy_id": booked["pregnancy"]["id"], "fields": _dose_fields(lot="")})
    assert r.status_code == 422
    assert r.get_json()["errors"] == {"lot": "is required"}


def test_unknown_kind_is_refused_with_the_allowed_kinds(client):
    r = client.api("POST", "/api/v1/records", json={"kind": "potion", "fields": {}})
    assert r.status_code == 422
    assert "not a record kind" in r.get_json()["errors"]["kind"]


def test_entry_needs_an_existing_pregnancy(client):
    r = client.api("POST", "/api/v1/records", json={"kind": "dose", "pregnancy_id": "nope", "fields": _dose_fields()})
    assert r.status_code == 422
    assert "pregnancy_id" in r.get_json()["errors"]


def test_id_must_be_a_uuid(client, booked):
    r = client.api("POST", "/api/v1/records", json={"id": "../../etc", "kind": "stock", "fields": {}})
    assert r.status_code == 422
    assert "id" in r.get_json()["errors"]


def test_body_must_be_json(client):
    r = client.c.post("/api/v1/records", data="x", headers={"X-CSRF-Token": client.token})
    assert r.status_code == 422
    assert "body" in r.get_json()["errors"]


def test_naive_datetime_is_facility_local_time(client, booked):
    # 10:00 in Nairobi (UTC+3) is 07:00 UTC.
    r = client.api("POST", "/api/v1/records", json={
        "kind": "event", "pregnancy_id": booked["pregnancy"]["id"],
        "fields": {"event_kind": "abdominal-trauma", "occurred_at": days_ago(1) + "T10:00"}})
    assert r.status_code == 201, r.get_json()
    assert r.get_json()["record"]["occurred_at"] == days_ago(1) + "T07:00:00Z"


def test_get_record_and_404(client, booked):
    rid = booked["typing"]["id"]
    assert client.get(f"/api/v1/records/{rid}").get_json()["record"]["rhd"] == "negative"
    r = client.get("/api/v1/records/nope")
    assert r.status_code == 404 and "nope" in r.get_json()["error"]


def test_patch_amends_with_reason_and_keeps_earlier_value(client, booked):
    rid = booked["typing"]["id"]
    r = client.api("PATCH", f"/api/v1/records/{rid}",
                   json={"changes": {"abo": "A"}, "reason": "lab report re-read", "expected_version": 1})
    assert r.status_code == 200, r.get_json()
    rec = r.get_json()["record"]
    assert rec["abo"] == "A" and rec["version"] == 2
    assert rec["amendments"][0]["changes"]["abo"] == {"old": "O", "new": "A"}
    assert rec["amendments"][0]["reason"] == "lab report re-read"


def test_stale_patch_is_a_409_and_overwrites_nothing(client, booked, store):
    rid = booked["typing"]["id"]
    ok = client.api("PATCH", f"/api/v1/records/{rid}",
                    json={"changes": {"abo": "A"}, "reason": "amended on the laptop", "expected_version": 1})
    assert ok.status_code == 200
    stale = client.api("PATCH", f"/api/v1/records/{rid}",
                       json={"changes": {"abo": "B"}, "reason": "phone edit", "expected_version": 1})
    assert stale.status_code == 409
    assert stale.get_json()["current_version"] == 2
    assert store.get(rid)["abo"] == "A"


def test_patch_needs_reason_and_expected_version(client, booked):
    r = client.api("PATCH", f"/api/v1/records/{booked['typing']['id']}", json={"changes": {"abo": "A"}})
    assert r.status_code == 422
    assert set(r.get_json()["errors"]) == {"reason", "expected_version"}


def test_patch_validation_error_names_field(client, booked):
    r = client.api("PATCH", f"/api/v1/records/{booked['typing']['id']}",
                   json={"changes": {"abo": "Z"}, "reason": "typo", "expected_version": 1})
    assert r.status_code == 422
    assert "abo" in r.get_json()["errors"]


def test_patch_voided_true_voids_and_keeps_the_record(client, booked, store):
    sid = booked["screen"]["id"]
    r = client.api("PATCH", f"/api/v1/records/{sid}",
                   json={"changes": {"voided": True}, "reason": "wrong woman's sample", "expected_version": 1})
    assert r.status_code == 200
    assert store.get(sid)["voided"] is True
    assert store.get(sid)["voided_reason"] == "wrong woman's sample"


def test_patch_unknown_record_is_404(client):
    r = client.api("PATCH", "/api/v1/records/nope",
                   json={"changes": {"abo": "A"}, "reason": "x", "expected_version": 1})
    assert r.status_code == 404
