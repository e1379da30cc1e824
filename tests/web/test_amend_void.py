"""Amendments need a reason and keep the earlier values visible; a stale form never overwrites
(409); voiding keeps the record, struck through, with its reason."""
from __future__ import annotations

import re


def _amend_form(html: str) -> dict:
    data = {}
    for name, value in re.findall(r'<input type="hidden" name="(expected_version)" value="([^"]*)"', html):
        data[name] = value
    data["_shown"] = re.findall(r'name="_shown" value="([^"]+)"', html)
    return data


def test_amend_form_shows_current_values_and_version(client, booked):
    rid = booked["typing"]["id"]
    html = client.get(f"/records/{rid}/amend").get_data(as_text=True)
    assert '<option value="O" selected>' in html
    assert 'name="expected_version" value="1"' in html
    assert f'data-api="/api/v1/records/{rid}" data-method="PATCH"' in html


def test_amend_saves_and_earlier_value_stays_visible(client, booked, store):
    rid = booked["typing"]["id"]
    form = _amend_form(client.get(f"/records/{rid}/amend").get_data(as_text=True))
    form.update({"abo": "A", "rhd": "negative", "tested_on": booked["typing"]["tested_on"],
                 "reason": "lab sheet re-read"})
    r = client.post(f"/records/{rid}/amend", data=form)
    assert r.status_code == 302, r.get_data(as_text=True)[-2000:]
    assert store.get(rid)["abo"] == "A"
    page = client.get(f"/pregnancies/{booked['pregnancy']['id']}").get_data(as_text=True)
    assert "Amended 1 time" in page and "lab sheet re-read" in page
    assert "<del>O</del> → <ins>A</ins>" in page


def test_amend_without_reason_is_refused_next_to_the_reason(client, booked, store):
    rid = booked["typing"]["id"]
    form = _amend_form(client.get(f"/records/{rid}/amend").get_data(as_text=True))
    form.update({"abo": "A", "rhd": "negative", "tested_on": booked["typing"]["tested_on"], "reason": ""})
    r = client.post(f"/records/{rid}/amend", data=form)
    assert r.status_code == 422
    assert re.search(r'data-error-for="reason"[^>]*>Reason is required', r.get_data(as_text=True))
    assert store.get(rid)["abo"] == "O"


def test_amend_with_invalid_value_names_the_field(client, booked, store):
    rid = booked["typing"]["id"]
    form = _amend_form(client.get(f"/records/{rid}/amend").get_data(as_text=True))
    form.update({"abo": "O", "rhd": "negative", "tested_on": "2999-01-01", "reason": "date typo"})
    r = client.post(f"/records/{rid}/amend", data=form)
    assert r.status_code == 422
    assert re.search(
        r'data-error-for="tested_on"[^>]*>Date tested 2999-01-01 is in the future', r.get_data(as_text=True)
    )


def test_stale_amend_form_is_a_409_and_overwrites_nothing(client, booked, store):
    rid = booked["typing"]["id"]
    form = _amend_form(client.get(f"/records/{rid}/amend").get_data(as_text=True))
    store.amend(rid, {"abo": "B"}, by="mwangi", reason="changed on the laptop meanwhile")
    form.update({"abo": "A", "rhd": "negative", "tested_on": booked["typing"]["tested_on"], "reason": "phone"})
    r = client.post(f"/records/{rid}/amend", data=form)
    assert r.status_code == 409
    html = r.get_data(as_text=True)
    assert "amended by someone else meanwhile" in html
    assert '<option value="B" selected>' in html  # the current values are shown
    assert store.get(rid)["abo"] == "B"


def test_amend_with_nothing_changed_says_so(client, booked):
    rid = booked["typing"]["id"]
    form = _amend_form(client.get(f"/records/{rid}/amend").get_data(as_text=True))
    form.update({"abo": "O", "rhd": "negative", "tested_on": booked["typing"]["tested_on"], "reason": "check"})
    r = client.post(f"/records/{rid}/amend", data=form)
    assert r.status_code == 422
    assert "Nothing was changed" in r.get_data(as_text=True)


def test_amend_woman_details(client, booked, store):
    wid = booked["woman"]["id"]
    html = client.get(f"/records/{wid}/amend").get_data(as_text=True)
    form = _amend_form(html)
    w = booked["woman"]
    form.update(
        {
            "name": w["name"],
            "birth_date": w["birth_date"],
            "phone": "0700 999 000",
            "register_no": w["register_no"],
            "village": w["village"],
            "reason": "new phone",
        }
    )
    r = client.post(f"/records/{wid}/amend", data=form)
    assert r.status_code == 302
    assert r.headers["Location"] == f"/women/{wid}"
    assert store.get(wid)["phone"] == "0700 999 000"


def test_void_needs_a_reason(client, booked, store):
    sid = booked["screen"]["id"]
    r = client.post(f"/records/{sid}/void", data={"reason": ""})
    assert r.status_code == 422
    assert "Reason is required" in r.get_data(as_text=True)
    assert not store.get(sid)["voided"]


def test_void_keeps_the_entry_struck_through_with_its_reason(client, booked, store):
    sid = booked["screen"]["id"]
    assert "A voided entry stays on record" in client.get(f"/records/{sid}/void").get_data(as_text=True)
    r = client.post(f"/records/{sid}/void", data={"reason": "sample of another woman"})
    assert r.status_code == 302
    assert store.get(sid)["voided"] is True
    page = client.get(f"/pregnancies/{booked['pregnancy']['id']}").get_data(as_text=True)
    assert re.search(rf'id="r-{sid}" class="entry kind-screen voided"', page)
    assert "voided: sample of another woman" in page


def test_void_twice_is_refused(client, booked, store):
    sid = booked["screen"]["id"]
    store.void(sid, by="mwangi", reason="wrong")
    assert client.get(f"/records/{sid}/void").status_code == 409


def test_amend_unknown_record_is_404(client):
    assert client.get("/records/nope/amend").status_code == 404
    assert client.get("/records/nope/void").status_code == 404
