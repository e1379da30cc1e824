"""Today: every due, overdue and soon-due plan item of the facility, most urgent first, with the
72-hour deadline in local time, filters, alerts, and one tap to the woman's record."""
from __future__ import annotations

from datetime import datetime, timedelta
from zoneinfo import ZoneInfo

import pytest

from tests.web.conftest import at_ago, days_ago

TZ = ZoneInfo("Africa/Nairobi")


@pytest.fixture
def event_2h_ago(store, booked):
    ev = store.create("event", {"event_kind": "abdominal-trauma", "occurred_at": at_ago(hours=2)},
                      by="mwangi", facility="test-clinic", pregnancy_id=booked["pregnancy"]["id"]).record
    return ev


def _event_item(client):
    items = client.get("/api/v1/worklist").get_json()["items"]
    return [i for i in items if i["item"]["category"] == "event"]


def test_event_dose_is_on_today_with_its_72_hour_deadline_in_local_time(client, booked, event_2h_ago):
    rows = _event_item(client)
    (row,) = [r for r in rows if r["item"]["code"].startswith("event-dose")]
    assert row["item"]["state"] == "due"
    closes = datetime.fromisoformat(row["item"]["closes"].replace("Z", "+00:00"))
    occurred = datetime.fromisoformat(event_2h_ago["occurred_at"].replace("Z", "+00:00"))
    assert closes - occurred == timedelta(hours=72)
    html = client.get("/").get_data(as_text=True)
    local = closes.astimezone(TZ)
    assert f"Give anti-D before {local.strftime('%H:%M')}" in html
    assert "(in 2 d 22 h)" in html or "(in 2 d 21 h)" in html
    assert "Amina Testcase" in html
    assert f'href="/pregnancies/{booked["pregnancy"]["id"]}"' in html


def test_today_carries_the_dose_caution(client, booked, event_2h_ago):
    html = client.get("/").get_data(as_text=True)
    assert "Decision support only." in html and "product label and local protocol" in html


def test_worklist_is_most_urgent_first(client, booked, event_2h_ago):
    items = client.get("/api/v1/worklist").get_json()["items"]
    keys = []
    for i in items:
        rank = {"overdue": 0, "due": 1}.get(i["item"]["state"], 2)
        keys.append((rank, i["item"]["closes"] or i["item"]["due"] or "9999"))
    assert keys == sorted(keys)


@pytest.mark.parametrize("flt,category", [("events", "event"), ("postpartum", "postpartum"),
                                          ("surveillance", "surveillance"), ("tests", "typing"),
                                          ("routine-week", "routine")])
def test_filters_keep_only_their_category(client, booked, event_2h_ago, flt, category):
    r = client.get(f"/api/v1/worklist?filter={flt}")
    assert r.status_code == 200
    cats = {i["item"]["category"] for i in r.get_json()["items"]}
    allowed = {"events": {"event"}, "postpartum": {"postpartum", "birth"},
               "surveillance": {"surveillance"}, "tests": {"screen", "typing"},
               "routine-week": {"routine"}}[flt]
    assert cats <= allowed
    assert client.get(f"/?filter={flt}").status_code == 200


def test_events_filter_shows_the_event_dose(client, booked, event_2h_ago):
    html = client.get("/?filter=events").get_data(as_text=True)
    assert "Give anti-D before" in html


def test_unknown_filter_is_refused_with_the_allowed_ones(client):
    r = client.get("/?filter=nonsense")
    assert r.status_code == 400
    assert "routine-week" in r.get_data(as_text=True)
    j = client.get("/api/v1/worklist?filter=nonsense").get_json()
    assert "filter" in j["errors"]


def test_nothing_due_says_so(client):
    assert "Nothing due, overdue or due in the next 14 days" in client.get("/").get_data(as_text=True)


def test_postpartum_dose_for_rhd_positive_baby_appears(client, store, booked):
    pid = booked["pregnancy"]["id"]
    store.create("birth", {"born_at": at_ago(hours=5), "outcome": "live-birth", "baby_rhd": "positive"},
                 by="mwangi", facility="test-clinic", pregnancy_id=pid)
    store.amend(pid, {"status": "delivered"}, by="mwangi", reason="born")
    items = client.get("/api/v1/worklist?filter=postpartum").get_json()["items"]
    assert any(i["item"]["category"] == "postpartum" and i["item"]["state"] == "due" for i in items)


def test_alerts_are_shown_on_today(client, store, booked):
    pid = booked["pregnancy"]["id"]
    store.create("screen", {"sampled_at": at_ago(hours=3), "result": "positive", "antibodies": ["anti-D"],
                            "titre": 32, "titre_antibody": "anti-D", "anti_d_origin": "immune"},
                 by="mwangi", facility="test-clinic", pregnancy_id=pid)
    j = client.get("/api/v1/worklist").get_json()
    assert j["alerts"], "an immune anti-D should raise an alert"
    html = client.get("/").get_data(as_text=True)
    assert "Alerts" in html and "DANGER" in html or "WARNING" in html


def test_a_woman_brought_on_her_card_is_on_today_and_bundle_copies_are_not(client, store):
    def _woman_with_event(name, origin):
        w = store.create("woman", {"name": name, "stated_age": 30}, by="x", facility="other-clinic",
                         origin=origin).record
        p = store.create("pregnancy", {"booked_on": days_ago(100), "lmp": days_ago(150), "status": "ongoing"},
                         by="x", facility="other-clinic", woman_id=w["id"], origin=origin).record
        store.create("typing", {"abo": "A", "rhd": "negative", "tested_on": days_ago(99)}, by="x",
                     facility="other-clinic", pregnancy_id=p["id"], origin=origin)
        store.create("event", {"event_kind": "abdominal-trauma", "occurred_at": at_ago(hours=3)}, by="x",
                     facility="other-clinic", pregnancy_id=p["id"], origin=origin)
        return p

    card = _woman_with_event(
        "Carded Mover", {"via": "card", "facility": "other-clinic", "issue": "2026-01-01T00:00:00Z"}
    )
    bundle = _woman_with_event(
        "Bundled Copy", {"via": "bundle", "facility": "other-clinic", "issue": "2026-01-01T00:00:00Z"}
    )
    ids = {i["pregnancy_id"] for i in client.get("/api/v1/worklist").get_json()["items"]}
    assert card["id"] in ids and bundle["id"] not in ids


def test_record_page_offers_the_entry_that_completes_each_open_item(client, booked, event_2h_ago):
    # The booking fixture leaves the booking screen or typing and the event's dose open: each open
    # item that an entry completes links to that entry's form, and only dose items say "dose".
    from clinic.web.helpers import entry_kind_for

    assert entry_kind_for({"code": "event-fmh:abc", "dose_iu": None}) == "fmh"
    assert entry_kind_for({"code": "event-dose:abc", "dose_iu": 250}) == "dose"
    assert entry_kind_for({"code": "partner-typing"}) == "partner_typing"
    assert entry_kind_for({"code": "something-else"}) is None
    pid = booked["pregnancy"]["id"]
    html = client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    assert "Record this dose" in html
    assert f"/pregnancies/{pid}/add/partner_typing" in html  # partner typing is due at 20 weeks
    assert html.count('class="item-actions"') >= 2


def test_a_positive_screen_without_an_antibody_is_on_today_and_the_record(client, store, booked):
    # issue 11 rule 1 (BSH 2016, White et al., abstract: a detected antibody is identified): the
    # identification task and its alert reach Today and her record page
    pid = booked["pregnancy"]["id"]
    s = store.create("screen", {"sampled_at": at_ago(days=1), "result": "positive"},
                     by="mwangi", facility="test-clinic", pregnancy_id=pid).record
    body = client.get("/api/v1/worklist").get_json()
    (row,) = [i for i in body["items"] if i["item"]["code"] == f"antibody-identification:{s['id']}"]
    assert row["item"]["state"] == "due" and row["item"]["category"] == "screen"
    tests = client.get("/api/v1/worklist?filter=tests").get_json()["items"]
    assert any(i["item"]["code"].startswith("antibody-identification") for i in tests)
    html = client.get("/").get_data(as_text=True)
    assert "Identify the antibody on the positive screen" in html and "antibody not identified" in html
    page = client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    assert "Identify the antibody on the positive screen" in page
