"""The Supply page of a clinic: her facility's forecast, stock-out date, lots expiring unused,
the caution, the CSV and JSON downloads, and the menu link."""
from __future__ import annotations

import json
from datetime import datetime, timedelta

from tests.web.conftest import TZ, app, booked, client, data_dir, days_ago, officer, password_hash, store  # noqa: F401


def _receive(client, lot, expiry, vials):
    r = client.post("/stock", data={"move": "received", "at": (datetime.now(TZ) - timedelta(hours=2)).strftime(
        "%Y-%m-%dT%H:%M"), "product": "Anti-D 1500", "vial_iu": "1500", "lot": lot, "lot_expiry": expiry,
        "vials": str(vials)})
    assert r.status_code == 302, r.get_data(as_text=True)[-1500:]


def test_the_menu_links_the_supply_page(client):
    assert '>Supply</a>' in client.get("/").get_data(as_text=True)


def test_the_page_forecasts_her_facility(client, booked):
    # She is at 20+0 (LMP 140 days ago): routine dose 1 (500 IU, one 1500 IU vial, the only product)
    # opens at 28+0, in 56 days. The one vial on hand expires in 30 days: it expires unused, and
    # the dose on day 56 finds nothing: stock-out then.
    expiry = days_ago(-30)
    _receive(client, "LOT-SHORT", expiry, 1)
    html = client.get("/supply/").get_data(as_text=True)
    assert "Hillside Test Clinic" in html and "Anti-D 1500" in html
    assert "A forecast is an estimate from the records entered" in html and "pharmacy" in html
    assert "lot LOT-SHORT" in html and "Suggested transfers" not in html
    doc = json.loads(client.get("/supply/forecast.json").get_data(as_text=True))
    [f] = doc["facilities"]
    [p] = f["products"]
    assert (f["facility"], p["expected_vials"], p["on_hand_vials"], p["expiring_unused_vials"]) == (
        "test-clinic", 1.0, 1, 1)
    assert p["stockout_date"] == days_ago(-56)
    assert doc["transfers"] == []


def test_the_weeks_can_be_chosen(client, booked):
    doc = json.loads(client.get("/supply/forecast.json?weeks=4").get_data(as_text=True))
    # 4 weeks: the routine dose on day 56 is outside
    assert doc["weeks"] == 4 and doc["facilities"][0]["products"][0]["expected_vials"] == 0
    assert client.get("/supply/?weeks=99").status_code == 400
    assert client.get("/supply/?weeks=x").status_code == 400
    assert client.get("/supply/forecast.pdf").status_code == 404


def test_the_csv_downloads(client, officer):
    for c in (client, officer):
        r = c.get("/supply/forecast.csv")
        assert r.status_code == 200 and r.mimetype == "text/csv"
        assert r.headers["Content-Disposition"].startswith('attachment; filename="anti-d-forecast-')
        assert r.get_data(as_text=True).startswith("record,facility,facility_name,product,vial_iu,")


def test_signed_out_is_sent_to_sign_in(app):
    r = app.test_client().get("/supply/")
    assert r.status_code == 302 and "/signin" in r.headers["Location"]
