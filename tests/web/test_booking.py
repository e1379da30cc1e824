"""Register a booking: woman + pregnancy (+ typing, partner's typing, screen) in one go, nothing
half-written, and the duplicate check before saving — through the API and the HTML form."""
from __future__ import annotations

from tests.web.conftest import at_ago, days_ago, new_id


def _booking(name="Neema Bookingtest", birth_date="1998-07-01", phone="0711 000 999", **extra):
    b = {
        "woman": {"id": new_id(), "fields": {"name": name, "birth_date": birth_date, "phone": phone,
                                             "village": "Hilltop"}},
        "pregnancy": {"id": new_id(), "fields": {"booked_on": days_ago(0), "lmp": days_ago(70),
                                                 "status": "ongoing", "gravidity": 1, "parity": 0}},
        "typing": {"id": new_id(), "fields": {"abo": "A", "rhd": "negative", "tested_on": days_ago(0)}},
        "partner_typing": {"id": new_id(), "fields": {"rhd": "positive"}},
        "screen": {"id": new_id(), "fields": {"sampled_at": at_ago(hours=1), "result": "negative"}},
    }
    b.update(extra)
    return b


def test_booking_creates_every_part_linked(client, store):
    b = _booking()
    r = client.api("POST", "/api/v1/bookings", json=b)
    assert r.status_code == 201, r.get_json()
    recs = r.get_json()["records"]
    pid = b["pregnancy"]["id"]
    assert recs["pregnancy"]["woman_id"] == b["woman"]["id"]
    assert {e["kind"] for e in store.entries(pid)} == {"typing", "partner_typing", "screen"}
    assert r.get_json()["redirect"] == f"/pregnancies/{pid}"


def test_booking_nothing_half_written_when_one_part_is_invalid(client, store):
    b = _booking()
    b["screen"]["fields"]["result"] = "maybe"
    r = client.api("POST", "/api/v1/bookings", json=b)
    assert r.status_code == 422
    assert "screen.result" in r.get_json()["errors"]
    assert store.get(b["woman"]["id"]) is None
    assert store.get(b["pregnancy"]["id"]) is None


def test_booking_errors_of_several_parts_all_named(client):
    b = _booking()
    b["woman"]["fields"]["birth_date"] = "2999-01-01"
    b["pregnancy"]["fields"].pop("lmp")
    r = client.api("POST", "/api/v1/bookings", json=b)
    errs = r.get_json()["errors"]
    assert "woman.birth_date" in errs and "pregnancy.lmp" in errs


def test_booking_duplicate_check_warns_with_the_similar_woman(client, booked, store):
    # Same birth date as the booked woman, name spelled a little differently.
    b = _booking(name="Amina Testkase", birth_date="1995-03-04", phone="")
    r = client.api("POST", "/api/v1/bookings", json=b)
    assert r.status_code == 409
    dups = r.get_json()["duplicates"]
    assert [d["id"] for d in dups] == [booked["woman"]["id"]]
    assert store.get(b["woman"]["id"]) is None


def test_booking_duplicate_confirmed_as_a_different_woman_is_saved(client, booked, store):
    b = _booking(name="Amina Testkase", birth_date="1995-03-04", phone="", confirm_not_duplicate=True)
    r = client.api("POST", "/api/v1/bookings", json=b)
    assert r.status_code == 201
    assert store.get(b["woman"]["id"])["name"] == "Amina Testkase"


def test_booking_replay_is_idempotent(client, store):
    b = _booking()
    assert client.api("POST", "/api/v1/bookings", json=b).status_code == 201
    again = client.api("POST", "/api/v1/bookings", json=b)
    assert again.status_code == 200 and again.get_json()["replay"] is True
    assert len(store.pregnancies_of_woman(b["woman"]["id"])) == 1


def test_booking_a_new_pregnancy_for_a_woman_on_record(client, booked, store):
    b = _booking()
    b["woman"] = {"id": booked["woman"]["id"]}
    r = client.api("POST", "/api/v1/bookings", json=b)
    assert r.status_code == 201, r.get_json()
    assert len(store.pregnancies_of_woman(booked["woman"]["id"])) == 2


def test_booking_optional_parts_may_be_left_out(client):
    b = _booking()
    for p in ("typing", "partner_typing", "screen"):
        b.pop(p)
    assert client.api("POST", "/api/v1/bookings", json=b).status_code == 201


def test_booking_needs_woman_and_pregnancy(client):
    r = client.api("POST", "/api/v1/bookings", json={})
    assert r.status_code == 422
    assert set(r.get_json()["errors"]) == {"woman", "pregnancy"}


# ---- the HTML form (no JavaScript) ----

def _form(name="Zawadi Formtest", birth_date="1990-02-02"):
    return {"woman.name": name, "woman.birth_date": birth_date, "woman.village": "Lakeside",
            "pregnancy.booked_on": days_ago(0), "pregnancy.lmp": days_ago(84), "pregnancy.status": "ongoing",
            "typing.abo": "B", "typing.rhd": "negative", "typing.tested_on": days_ago(0),
            "screen.sampled_at": "", "screen.result": ""}


def test_booking_page_shows_every_part(client):
    html = client.get("/book").get_data(as_text=True)
    for text in ("Full name", "Last menstrual period", "Crown-rump length", "RhD", "Baby&#39;s father",
                 "antibody screen (IAT)", 'data-api="/api/v1/bookings"', 'name="pregnancy.lmp"', "data-ga-preview"):
        assert text in html, text


def test_booking_form_saves_and_goes_to_the_record(client, store):
    r = client.post("/book", data=_form())
    assert r.status_code == 302, r.get_data(as_text=True)
    page = client.get(r.headers["Location"]).get_data(as_text=True)
    assert "Zawadi Formtest" in page


def test_booking_form_shows_errors_next_to_fields(client):
    data = _form()
    data["woman.birth_date"] = ""
    data["pregnancy.lmp"] = days_ago(-3)
    r = client.post("/book", data=data)
    assert r.status_code == 422
    html = r.get_data(as_text=True)
    assert 'data-error-for="woman.birth_date"' in html
    assert "give the date of birth or, when it is not known, the stated age" in html
    assert "is in the future" in html


def test_booking_form_duplicate_warning_then_confirm(client, booked, store):
    data = _form(name="Amina Testcase", birth_date="1995-03-04")
    r = client.post("/book", data=data)
    assert r.status_code == 409
    html = r.get_data(as_text=True)
    assert "Is she already on record?" in html and "This is a different woman: save anyway" in html
    assert f"/women/{booked['woman']['id']}" in html
    assert len(store.women_of()) == 1
    import re

    ids = dict(re.findall(r'name="(\w+)\.id" value="([^"]*)"', html))
    data.update({f"{k}.id": v for k, v in ids.items()})
    data["confirm_not_duplicate"] = "yes"
    r = client.post("/book", data=data)
    assert r.status_code == 302
    assert len(store.women_of()) == 2


def test_booking_form_for_a_woman_on_record_books_only_the_pregnancy(client, booked, store):
    wid = booked["woman"]["id"]
    html = client.get(f"/book?woman_id={wid}").get_data(as_text=True)
    assert "New pregnancy for" in html and 'name="woman.name"' not in html
    r = client.post("/book", data={"woman_id": wid, "pregnancy.booked_on": days_ago(0),
                                   "pregnancy.lmp": days_ago(50), "pregnancy.status": "ongoing"})
    assert r.status_code == 302, r.get_data(as_text=True)[-1500:]
    assert len(store.pregnancies_of_woman(wid)) == 2
    assert len(store.women_of()) == 1


def test_booking_form_shows_the_dating_worked_out_on_the_server(client):
    data = _form()
    data["woman.name"] = ""
    r = client.post("/book", data=data)
    assert r.status_code == 422
    html = r.get_data(as_text=True)
    assert "GA today 12+0" in html and "dated by the LMP" in html


def test_booking_for_unknown_woman_is_404(client):
    assert client.get("/book?woman_id=nope").status_code == 404
