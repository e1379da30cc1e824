"""The anti-D stock ledger: movements recorded with the schema's form; on hand by lot with expiry."""
from __future__ import annotations

import re

from tests.web.conftest import at_ago


def _move(store, move, vials, lot="LOT-A", expiry="2030-06-30", hours=5):
    return store.create("stock", {"move": move, "at": at_ago(hours=hours), "product": "Anti-D 1500",
                                  "vial_iu": 1500, "lot": lot, "lot_expiry": expiry, "vials": vials},
                        by="mwangi", facility="test-clinic").record


def test_stock_page_shows_on_hand_by_lot(client, store):
    _move(store, "received", 10, hours=9)
    _move(store, "given", 1, hours=8)
    _move(store, "cold-chain-break", 2, hours=7)
    _move(store, "received", 3, lot="LOT-OLD", expiry="2020-01-01", hours=6)
    html = client.get("/stock").get_data(as_text=True)
    row = re.search(r"(?s)<tr class=\"[^\"]*\">\s*<td><strong>LOT-A</strong>"
                    r"<br><small>Anti-D 1500 \(1500 IU\)</small></td>.*?</tr>",
                    html).group(0)
    assert "<td>7</td><td>10500</td>" in row
    assert re.search(r'(?s)<tr class="expired">.*?LOT-OLD.*?expired', html)


def test_stock_form_records_a_movement(client, store):
    r = client.post("/stock", data={"move": "received", "at": "2026-01-01T10:00", "product": "Anti-D 1500",
                                    "vial_iu": "1500", "lot": "NEW-1", "lot_expiry": "2031-01-01", "vials": "5"})
    assert r.status_code == 302, r.get_data(as_text=True)[-2000:]
    (rec,) = list(store.iter_records(kind="stock"))
    assert rec["lot"] == "NEW-1" and rec["vials"] == 5
    assert "NEW-1" in client.get("/stock").get_data(as_text=True)


def test_stock_form_error_names_the_field_and_range(client, store):
    r = client.post("/stock", data={"move": "received", "at": "2026-01-01T10:00", "product": "Anti-D 1500",
                                    "vial_iu": "20", "lot": "X", "lot_expiry": "2031-01-01", "vials": "0"})
    assert r.status_code == 422
    html = r.get_data(as_text=True)
    assert re.search(r'data-error-for="vial_iu"[^>]*>'
                     r'Vial size \(IU\) 20 is outside the allowed range 50 to 15000', html)
    assert re.search(r'data-error-for="vials"[^>]*>Vials', html)
    assert not list(store.iter_records(kind="stock"))


def test_stock_form_follows_the_outbox_contract(client):
    html = client.get("/stock").get_data(as_text=True)
    assert 'data-api="/api/v1/records" data-kind="stock"' in html
    assert '<input type="hidden" name="kind" value="stock">' in html
    assert 'name="product" value="Anti-D 1500"' in html


def test_stock_via_api(client, store):
    r = client.api("POST", "/api/v1/records", json={"kind": "stock", "fields": {
        "move": "discarded", "at": at_ago(hours=1), "product": "Anti-D 1500", "vial_iu": 1500, "lot": "Z",
        "lot_expiry": "2030-01-01", "vials": 1}})
    assert r.status_code == 201
    assert r.get_json()["redirect"] == "/stock"


def test_dose_form_suggests_the_lot_on_hand_expiring_first(client, store, booked):
    _move(store, "received", 4, lot="LATER", expiry="2031-01-01")
    _move(store, "received", 4, lot="SOONER", expiry="2029-01-01")
    html = client.get(f"/pregnancies/{booked['pregnancy']['id']}/add/dose").get_data(as_text=True)
    assert 'name="lot" value="SOONER"' in html and 'name="lot_expiry" value="2029-01-01"' in html


def test_district_officer_may_read_stock_but_not_record(officer):
    assert officer.get("/stock").status_code == 200
    assert officer.post("/stock", data={"move": "received"}).status_code == 403


def test_a_dose_links_to_taking_its_vials_off_the_stock(client, store, booked):
    pid = booked["pregnancy"]["id"]
    _move(store, "received", 4, lot="L-9", expiry="2030-01-01", hours=30)
    dose = store.create("dose", {"given_at": at_ago(hours=2), "amount": 1500, "unit": "IU", "route": "IM",
                                 "product": "Anti-D 1500", "lot": "L-9", "lot_expiry": "2030-01-01",
                                 "indication": "routine-antenatal", "given_by": "Midwife Test"},
                        by="mwangi", facility="test-clinic", pregnancy_id=pid).record
    page = client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    m = re.search(r'href="(/stock\?[^"]+)">Take the vials off the stock', page)
    assert m
    form = client.get(m.group(1).replace("&amp;", "&")).get_data(as_text=True)
    assert '<option value="given" selected>' in form
    assert f'name="dose_id" value="{dose["id"]}"' in form and 'name="vials" value="1"' in form
    _move(store, "given", 1, lot="L-9", expiry="2030-01-01", hours=1)
    store.create("stock", {"move": "given", "at": at_ago(hours=1), "product": "Anti-D 1500", "vial_iu": 1500,
                           "lot": "L-9", "lot_expiry": "2030-01-01", "vials": 1, "dose_id": dose["id"]},
                 by="mwangi", facility="test-clinic")
    assert "Take the vials off the stock" not in client.get(f"/pregnancies/{pid}").get_data(as_text=True)
