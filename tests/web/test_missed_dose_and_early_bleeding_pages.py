"""The pages follow the engine's second pass: the event form asks about early bleeding in the
guidelines' terms (BSH 2014, Qureshi et al., Transfus Med 24:8-20: bleeding that is repeated,
heavy or with abdominal pain), and a missed dose travels with the woman to her record page and
to the booking of her next pregnancy (follow-up screen: common practice, profile missed_dose)."""
from __future__ import annotations

import re

from tests.web.conftest import at_ago, days_ago

FACTS = ("bleeding_heavy", "bleeding_repeated", "abdominal_pain")


def test_event_form_asks_each_bleeding_fact_with_a_clear_label(client, booked):
    html = client.get(f"/pregnancies/{booked['pregnancy']['id']}/add/event").get_data(as_text=True)
    for name, label in (("bleeding_heavy", "Bleeding is heavy"),
                        ("bleeding_repeated", "Bleeding is repeated (more than one episode)"),
                        ("abdominal_pain", "With abdominal pain"),
                        ("ongoing", "Bleeding continues (intermittent or ongoing)")):
        assert re.search(rf'<input type="checkbox" id="f-{name}" name="{name}" value="yes">\s*{re.escape(label)}',
                         html), name
    for name in FACTS:   # an unticked box is sent as "no": the question was asked
        assert f'<input type="hidden" name="{name}" value="no">' in html
    assert '<input type="hidden" name="ongoing" value="no">' not in html
    assert '<option value="threatened-miscarriage">threatened miscarriage</option>' in html


def test_the_form_as_a_browser_sends_it_records_no_for_unticked_boxes(client, booked, store):
    pid = booked["pregnancy"]["id"]
    local = re.sub(r"Z$", "", at_ago(hours=2))[:16]
    data = [("csrf_token", client.token), ("event_kind", "threatened-miscarriage"), ("occurred_at", local),
            ("bleeding_heavy", "no"), ("bleeding_repeated", "no"), ("bleeding_repeated", "yes"),
            ("abdominal_pain", "no")]
    from werkzeug.datastructures import MultiDict
    r = client.c.post(f"/pregnancies/{pid}/add/event", data=MultiDict(data))
    assert r.status_code == 302, r.get_data(as_text=True)[-2000:]
    (ev,) = [e for e in store.entries(pid) if e["kind"] == "event"]
    assert (ev["bleeding_heavy"], ev["bleeding_repeated"], ev["abdominal_pain"]) == (False, True, False)
    assert "ongoing" not in ev


def test_amending_an_older_event_records_the_facts_it_never_answered(client, booked, store):
    ev = store.create("event", {"event_kind": "antepartum-haemorrhage", "occurred_at": at_ago(hours=3)},
                      by="mwangi", facility="test-clinic", pregnancy_id=booked["pregnancy"]["id"]).record
    html = client.get(f"/records/{ev['id']}/amend").get_data(as_text=True)
    form = {"expected_version": "1", "_shown": re.findall(r'name="_shown" value="([^"]+)"', html),
            "event_kind": "antepartum-haemorrhage", "occurred_at": html.split('name="occurred_at" value="')[1][:16],
            "bleeding_heavy": "no", "bleeding_repeated": "no", "abdominal_pain": "yes", "ongoing": "no",
            "reason": "asked her: pain with the bleeding"}
    r = client.post(f"/records/{ev['id']}/amend", data=form)
    assert r.status_code == 302, r.get_data(as_text=True)[-2000:]
    got = store.get(ev["id"])
    assert (got["bleeding_heavy"], got["bleeding_repeated"], got["abdominal_pain"]) == (False, False, True)
    assert "ongoing" not in got or got["ongoing"] in (None, False)


def _missed_birth(store, booked):
    pid = booked["pregnancy"]["id"]
    store.create("birth", {"born_at": at_ago(days=15), "outcome": "live-birth", "baby_rhd": "positive",
                           "dat": "negative"}, by="mwangi", facility="test-clinic", pregnancy_id=pid)
    store.amend(pid, {"status": "delivered"}, by="mwangi", reason="birth recorded")
    return pid


def test_record_page_says_the_missed_dose_and_what_follows(client, store, booked):
    pid = _missed_birth(store, booked)
    html = client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    assert "Missed anti-D: what follows" in html
    assert re.search(r"<strong>MISSED</strong> Anti-D after birth \(\d\d \w{3} \d{4}\) was not given by", html)
    assert "an antibody screen from" in html and "at the booking of her next pregnancy" in html
    assert "Nothing open in the plan." not in html


def test_booking_her_next_pregnancy_raises_the_alert_at_booking(client, store, booked):
    _missed_birth(store, booked)
    wid = booked["woman"]["id"]
    r = client.post("/book", data={"woman_id": wid, "pregnancy.booked_on": days_ago(0),
                                   "pregnancy.lmp": days_ago(60), "pregnancy.status": "ongoing"})
    assert r.status_code == 302, r.get_data(as_text=True)[-1500:]
    html = client.get(r.headers["Location"].split("#")[0]).get_data(as_text=True)
    assert "EARLIER PREGNANCY" in html and "anti-D missed" in html
    assert "take the booking antibody screen now" in html
    new = [p for p in store.pregnancies_of_woman(wid) if p["id"] != booked["pregnancy"]["id"]][0]
    api = client.get(f"/api/v1/pregnancies/{new['id']}").get_json()
    codes = [a["code"] for a in api["plan"]["alerts"]]
    assert "earlier-dose-missed" in codes
    assert api["plan"]["earlier"][0]["pregnancy_id"] == booked["pregnancy"]["id"]
    today = client.get("/").get_data(as_text=True)
    assert "anti-D missed" in today


def test_the_api_takes_the_facts_and_refuses_a_bad_one_by_name(client, booked):
    pid = booked["pregnancy"]["id"]
    body = {"kind": "event", "pregnancy_id": pid,
            "fields": {"event_kind": "threatened-miscarriage", "occurred_at": at_ago(hours=1), "bleeding_heavy": True,
                       "bleeding_repeated": False, "abdominal_pain": False}}
    r = client.api("POST", "/api/v1/records", json=body)
    assert r.status_code == 201, r.get_json()
    rec = r.get_json()["record"]
    assert (rec["bleeding_heavy"], rec["bleeding_repeated"], rec["abdominal_pain"]) == (True, False, False)
    body["fields"]["abdominal_pain"] = "sometimes"
    body["id"] = "0d8e4d4c-5a0f-4d1e-9c3b-2b1a0f9e8d7c"
    bad = client.api("POST", "/api/v1/records", json=body)
    assert bad.status_code == 422 and "abdominal_pain" in str(bad.get_json())
