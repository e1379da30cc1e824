"""Stock against the forecast: lots used first-expiry-first (common practice), the stock-out
date, lots that expire before the forecast uses them, and lots already expired."""
from __future__ import annotations

from datetime import date

import pytest

from clinic.supply.forecast import forecast_products
from clinic.supply.stock_plan import Lot, plan_stock, simulate
from tests.supply import dataset as ds

E = 3 / 365                               # expected event vials a day (0.008219)
EARLY = Lot("L-EARLY", date(2026, 6, 20), 5)     # expires on day 19, mid-horizon
LATE = Lot("L-LATE", date(2027, 1, 31), 2)
GONE = Lot("L-EXPIRED", date(2026, 5, 1), 3)     # expired before today


@pytest.fixture(scope="module")
def daily():
    pregs = ds.clinic_a()
    return forecast_products(ds.needs(pregs), ds.rate(pregs), [ds.V500], start=ds.START, weeks=12)[0].daily


def test_the_lot_expiring_first_is_used_first():
    # 1 vial a day for 3 days; the later lot is listed first, the earlier one is still used first
    sim = simulate([Lot("B", date(2026, 12, 1), 5), Lot("A", date(2026, 7, 1), 2)], [1.0, 1.0, 1.0], ds.START)
    assert [(o.lot, o.used) for o in sim.lots] == [("B", 1.0), ("A", 2.0)]
    assert sim.unmet == 0 and sim.stockout_day is None


def test_a_lot_is_usable_on_its_expiry_date_and_not_after():
    lot = Lot("X", ds.day(1), 5)
    sim = simulate([lot], [1.0, 1.0, 1.0], ds.START)
    # used on day 0 and day 1 (its expiry date); day 2 has nothing: stock-out on day 2
    assert sim.lots[0].used == 2.0 and sim.stockout_day == 2
    assert sim.lots[0].expiring_unused == 3


def test_the_clinic_stock_plan(daily):
    sp = plan_stock([EARLY, LATE, GONE], daily, start=ds.START, upper_vials=8, lead_time_days=14)
    early, late = sp.lots
    # L-EARLY covers days 0-19: W6 + W7 today (2), W1's routine dose on day 10 (1) and 20 days of
    # events (20 x 0.008219 = 0.164384) = 3.164384 of its 5 vials; 1.835616 left on 20 Jun:
    # 1 whole vial expires unused.
    assert early.used == pytest.approx(3 + 20 * E)
    assert early.expiring_unused == 1 and sp.expiring_unused_vials == 1
    # L-LATE (2 vials) from day 20: events, W3's birth (0.7143, day 30), W4's (0.6, day 41):
    # 32 x 0.008219 + 1.3143 = 1.5773 by day 51; W1's routine dose 2 on day 52 needs 1 more:
    # stock-out on 23 Jul.
    assert late.used == pytest.approx(2.0) and late.expiring_unused == 0
    assert sp.stockout_date == date(2026, 7, 23)
    # unmet: days 20-83 need 64 x 0.008219 + 0.7143 + 0.6 + 1 = 2.840327; 2 vials cover 2
    assert sp.unmet_vials == pytest.approx(64 * E + 2.3143 - 2)
    # on hand: 5 + 2 usable; the expired lot is counted apart and never used
    assert (sp.on_hand_vials, sp.expired_vials, [lot.lot for lot in sp.expired_lots]) == (7, 3, ["L-EXPIRED"])


def test_no_stock_out_when_the_stock_covers_the_horizon(daily):
    sp = plan_stock([EARLY, Lot("L-BIG", date(2027, 1, 31), 10)], daily, start=ds.START, upper_vials=8,
                    lead_time_days=14)
    assert sp.stockout_date is None and sp.unmet_vials == 0


def test_a_lot_expiring_after_the_horizon_is_not_counted_as_unused(daily):
    sp = plan_stock([Lot("L-BIG", date(2027, 1, 31), 50)], daily, start=ds.START, upper_vials=8, lead_time_days=14)
    assert sp.expiring_unused_vials == 0 and not sp.lots[0].expires_in_horizon
