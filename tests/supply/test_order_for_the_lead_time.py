"""The suggested order: the upper figure less the vials that will be used before they expire;
order by the stock-out date less the facility's lead time (config.toml [supply])."""
from __future__ import annotations

from datetime import date

import pytest

from clinic.supply.errors import SupplyInputError
from clinic.supply.forecast import forecast_products
from clinic.supply.stock_plan import Lot, plan_stock
from tests.supply import dataset as ds

LOTS = [Lot("L-EARLY", date(2026, 6, 20), 5), Lot("L-LATE", date(2027, 1, 31), 2)]


@pytest.fixture(scope="module")
def fc():
    pregs = ds.clinic_a()
    return forecast_products(ds.needs(pregs), ds.rate(pregs), [ds.V500], start=ds.START, weeks=12)[0]


def test_order_covers_the_upper_figure(fc):
    sp = plan_stock(LOTS, fc.daily, start=ds.START, upper_vials=fc.upper_vials, lead_time_days=14)
    # upper 8 vials; usable 7 on hand less 1 that expires unused = 6; order 8 - 6 = 2
    assert (fc.upper_vials, sp.usable_vials, sp.order_vials) == (8, 6, 2)
    # stock-out 23 Jul less 14 days' lead time: order by 9 Jul; an order placed today arrives in time
    assert sp.order_by == date(2026, 7, 9) and not sp.order_urgent


def test_a_long_lead_time_is_urgent(fc):
    sp = plan_stock(LOTS, fc.daily, start=ds.START, upper_vials=fc.upper_vials, lead_time_days=60)
    # 23 Jul - 60 days is before today: order today, and even so it arrives after the stock-out
    assert sp.order_by == ds.START and sp.order_urgent


def test_enough_stock_orders_nothing(fc):
    sp = plan_stock([Lot("L-BIG", date(2027, 1, 31), 20)], fc.daily, start=ds.START, upper_vials=fc.upper_vials,
                    lead_time_days=14)
    assert sp.order_vials == 0 and sp.order_by is None


@pytest.mark.parametrize("lead", [-1, 181, 2.5])
def test_lead_time_out_of_range(fc, lead):
    with pytest.raises(SupplyInputError) as e:
        plan_stock(LOTS, fc.daily, start=ds.START, upper_vials=8, lead_time_days=lead)
    assert e.value.errors["lead_time_days"].endswith("allowed range 0 to 180 days")
