"""Each facility's stock ledger shows deliveries, vials given (one record per dose), an expired
lot discarded, a cold-chain break and a lot expiring within 60 days."""
from __future__ import annotations

from collections import Counter
from datetime import date, timedelta

import pytest

from seed_demo.scenario import FACILITY_SITES


def _stock(store):
    return list(store.iter_records(kind="stock"))


@pytest.mark.parametrize("site", FACILITY_SITES)
def test_every_dose_given_here_has_a_vial_given(site, demo, demo_stores):
    store = demo_stores[site]
    fid = demo[site]["facility_id"]
    doses = {r["id"]: r for r in store.iter_records(kind="dose") if r["facility"] == fid}
    given = {r["dose_id"]: r for r in _stock(store) if r["move"] == "given"}
    assert set(given) == set(doses)
    for did, g in given.items():
        assert g["lot"] == doses[did]["lot"]
        assert g["vials"] * g["vial_iu"] >= doses[did]["dose_iu"]


@pytest.mark.parametrize("site", FACILITY_SITES)
def test_no_lot_goes_below_zero(site, demo_stores):
    balance = Counter()
    sign = {"received": 1, "given": -1, "discarded": -1, "cold-chain-break": -1}
    for r in sorted(_stock(demo_stores[site]), key=lambda r: r["at"]):
        balance[r["lot"]] += sign[r["move"]] * r["vials"]
        assert balance[r["lot"]] >= 0, f"lot {r['lot']} below zero at {r['at']}"


def test_ledger_shows_every_kind_of_movement(demo_stores):
    moves = Counter(r["move"] for s in FACILITY_SITES for r in _stock(demo_stores[s]))
    assert {"received", "given", "discarded", "cold-chain-break"} <= set(moves)


@pytest.mark.parametrize("site", FACILITY_SITES)
def test_a_lot_expires_within_60_days(site, demo_stores, demo_now):
    today = demo_now.date()
    received = [r for r in _stock(demo_stores[site]) if r["move"] == "received"]
    soon = [r for r in received if today <= date.fromisoformat(r["lot_expiry"]) <= today + timedelta(days=60)]
    assert soon


def test_the_expired_lot_was_used_once_and_then_discarded(demo_stores, demo_now):
    stock = _stock(demo_stores["clinic-a"])
    expired = {r["lot"] for r in stock if date.fromisoformat(r["lot_expiry"]) < demo_now.date()}
    assert len(expired) == 1
    moves = Counter(r["move"] for r in stock if r["lot"] in expired)
    assert moves["given"] == 1 and moves["discarded"] == 1
