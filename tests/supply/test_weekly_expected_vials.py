"""The whole clinic, week by week: known doses + births weighted by their chance + events at the
observed rate, each dose in the product that gives it with the least anti-D drawn."""
from __future__ import annotations

import pytest

from clinic.supply.errors import SupplyInputError
from clinic.supply.forecast import ProductKey, allocate, forecast_products
from tests.supply import dataset as ds

E = 3 / 365 * 7      # events a week at the observed rate, one 500 IU vial each = 0.057534


@pytest.fixture(scope="module")
def forecasts():
    pregs = ds.clinic_a()
    return forecast_products(ds.needs(pregs), ds.rate(pregs), [ds.V500, ds.V1500], start=ds.START, weeks=12)


def test_expected_500_iu_vials_per_week(forecasts):
    fc = forecasts[0]
    assert fc.product == ds.V500
    expected = [
        2 + E,           # week 1: W6's postpartum dose and W7's event dose, both due now
        1 + E,           # week 2: W1's routine dose 1 (day 10)
        E,               # week 3: W2's birth (day 20) weighs 0: partner RhD negative
        E,               # week 4
        0.7143 + E,      # week 5: W3's birth (day 30), partner RhD positive: 1 / (1 + q)
        0.6 + E,         # week 6: W4's birth (day 41), partner unknown: 1 - q
        E,               # week 7
        1 + E,           # week 8: W1's routine dose 2 (day 52)
        E, E, E, E,      # weeks 9-12 (W5 counts nothing: fetal RHD negative)
    ]
    assert [w.expected_vials for w in fc.weeks] == pytest.approx(expected, abs=1e-9)
    assert [w.start.isoformat() for w in fc.weeks][:3] == ["2026-06-01", "2026-06-08", "2026-06-15"]
    # 4 known + 1.3143 births + 0.690411 events = 6.004711
    assert fc.expected_vials == pytest.approx(4 + 1.3143 + 3 * 84 / 365, abs=1e-9)
    assert fc.known_vials == 4 and fc.births_expected == pytest.approx(1.3143)


def test_the_categories_add_up(forecasts):
    for w in forecasts[0].weeks:
        assert w.routine_vials + w.postpartum_vials + w.event_vials == pytest.approx(w.expected_vials)
    assert [round(w.postpartum_vials, 4) for w in forecasts[0].weeks][:6] == [1, 0, 0, 0, 0.7143, 0.6]


def test_no_dose_is_given_from_the_1500_iu_vial(forecasts):
    # 500 IU from a 500 IU vial draws 500 IU, from a 1500 IU vial 1500 IU; 250 IU likewise.
    fc = forecasts[1]
    assert fc.product == ds.V1500 and fc.expected_vials == 0 and fc.upper_vials == 0


@pytest.mark.parametrize("dose, sizes, vial", [
    (500, (500, 1500), 500),      # 500 drawn vs 1500
    (1500, (500, 1500), 1500),    # 1500 drawn either way: one vial rather than three
    (2000, (500, 1500), 500),     # 4 x 500 = 2000 drawn vs 2 x 1500 = 3000
    (250, (250, 1500), 250),
    (1250, (1500,), 1500),        # the only product
])
def test_allocate_draws_the_least(dose, sizes, vial):
    products = [ProductKey(f"P{s}", s) for s in sizes]
    assert allocate(dose, products).vial_iu == vial


def test_without_products_there_is_nothing_to_allocate():
    with pytest.raises(SupplyInputError) as e:
        allocate(500, [])
    assert "products" in e.value.errors


@pytest.mark.parametrize("weeks", [0, 53, 1.5])
def test_weeks_out_of_range(weeks):
    with pytest.raises(SupplyInputError) as e:
        forecast_products([], ds.rate({}), [ds.V500], start=ds.START, weeks=weeks)
    assert e.value.errors["weeks"].endswith("allowed range 1 to 52")
