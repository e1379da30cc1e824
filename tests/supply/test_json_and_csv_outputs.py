"""The JSON of docs/supply-forecast.md and the tidy CSV, from the two-clinic district."""
from __future__ import annotations

import csv
import io
import json

import pytest

from clinic.supply.render import CSV_COLUMNS, csv_text, json_text, to_dict
from clinic.supply.report import build_report
from tests.supply import dataset as ds


@pytest.fixture(scope="module")
def rep():
    return build_report(ds.district_inputs(), now=ds.NOW, start=ds.START, weeks=12, percentile=90, transfer_days=3)


def test_json_shape(rep):
    doc = json.loads(json_text(rep))
    assert doc["format"] == "rhledger-supply-forecast" and doc["version"] == 1
    assert (doc["start"], doc["end"], doc["weeks"], doc["transfer_days"]) == ("2026-06-01", "2026-08-23", 12, 3)
    assert "confirm" in doc["caution"].lower() and "estimate" in doc["caution"]
    a, b = doc["facilities"]
    assert (a["facility"], a["events_12_months"], a["event_rate_per_week"]) == (ds.A, 3, 0.058)
    [p] = a["products"]
    for key in ("expected_vials", "upper_vials", "on_hand_vials", "expiring_unused_vials", "stockout_date",
                "order_vials"):
        assert key in p
    assert (p["product"], p["vial_iu"], p["expected_vials"], p["upper_vials"], p["on_hand_vials"],
            p["expiring_unused_vials"], p["stockout_date"], p["order_vials"]) == (
        ds.V500.name, 500, 6.0, 8, 7, 1, "2026-07-23", 2)
    assert len(p["weeks"]) == 12 and p["weeks"][0] == {
        "week": 1, "start": "2026-06-01", "routine_vials": 0.0, "postpartum_vials": 1.0, "event_vials": 1.06,
        "expected_vials": 2.06, "upper_vials": 2}
    assert p["after_transfers"]["stockout_date"] is None
    assert b["products"][0]["stockout_date"] is None          # null, not a string
    assert doc["transfers"] == [{"from": ds.B, "from_name": "Clinic B", "to": ds.A, "to_name": "Clinic A",
                                 "product": ds.V500.name, "vial_iu": 500, "lot": "B-SPARE", "vials": 1,
                                 "expiry": "2026-07-31", "arrives": "2026-06-04", "to_stockout_date": "2026-07-23"}]
    assert to_dict(rep) == doc


def test_csv_rows(rep):
    rows = list(csv.DictReader(io.StringIO(csv_text(rep))))
    assert tuple(rows[0]) == CSV_COLUMNS
    kinds = [r["record"] for r in rows]
    # per facility: one product row and its 12 weeks; then the transfer
    assert kinds == (["product"] + ["week"] * 12) * 2 + ["transfer"]
    assert rows[0]["stockout_date"] == "2026-07-23" and rows[13]["stockout_date"] == ""
    t = rows[-1]
    assert (t["from"], t["to"], t["lot"], t["vials"], t["expiry"], t["arrives"]) == (
        ds.B, ds.A, "B-SPARE", "1", "2026-07-31", "2026-06-04")
