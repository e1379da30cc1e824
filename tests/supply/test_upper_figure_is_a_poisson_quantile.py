"""The upper figure: known doses + the 90th percentile of a Poisson count of births (never more
than the births counted) + the 90th percentile of a Poisson count of events, in vials. The
90th percentile is a common-practice choice for a planning margin. Checked against scipy.stats."""
from __future__ import annotations

import math

import pytest
from scipy.stats import poisson

from clinic.supply.forecast import births_quantile, forecast_products
from clinic.supply.report import build_report
from tests.supply import dataset as ds

MU_BIRTHS = 0.7143 + 0.6          # W3 + W4 = 1.3143
MU_EVENTS = 3 * 84 / 365          # 0.690411


def _fc(percentile=90):
    pregs = ds.clinic_a()
    return forecast_products(ds.needs(pregs), ds.rate(pregs), [ds.V500], start=ds.START, weeks=12,
                             percentile=percentile)[0]


def test_twelve_week_upper_figure():
    # births: Poisson(1.3143) has P(<=2) = 0.8538, P(<=3) = 0.9555 -> 3, but only 2 births are counted -> 2
    # events: Poisson(0.690411) -> 2 (see test_poisson_quantile); known doses: 4 vials
    assert int(poisson.ppf(0.9, MU_BIRTHS)) == 3 and int(poisson.ppf(0.9, MU_EVENTS)) == 2
    assert _fc().upper_vials == 4 + min(int(poisson.ppf(0.9, MU_BIRTHS)), 2) + int(poisson.ppf(0.9, MU_EVENTS)) == 8


def test_weekly_upper_figures():
    fc = _fc()
    mu_week = 3 * 7 / 365   # 0.0575: Poisson 90th percentile 0, so the weekly event margin is 0
    assert int(poisson.ppf(0.9, mu_week)) == 0
    # week 5: W3 alone, Poisson(0.7143) -> 2, capped at the one birth -> 1; week 6 likewise
    assert int(poisson.ppf(0.9, 0.7143)) == 2
    assert [w.upper_vials for w in fc.weeks] == [2, 1, 0, 0, 1, 1, 0, 1, 0, 0, 0, 0]


@pytest.mark.parametrize("percentile", [50, 75, 95, 99])
def test_other_percentiles(percentile):
    q = percentile / 100
    want = 4 + min(int(poisson.ppf(q, MU_BIRTHS)), 2) + int(poisson.ppf(q, MU_EVENTS))
    assert _fc(percentile).upper_vials == want


@pytest.mark.parametrize("chances", [[0.2] * 30, [0.9] * 3, [0.5, 0.25], [0.78] * 12])
def test_births_quantile(chances):
    assert births_quantile(0.9, chances) == min(int(poisson.ppf(0.9, math.fsum(chances))), len(chances))


def test_facility_dose_totals():
    pregs = ds.clinic_a()
    rep = build_report([_input(pregs)], now=ds.NOW, start=ds.START, weeks=12, percentile=90, transfer_days=3)
    f = rep.facilities[0]
    # doses, whatever the vial: 4 known + 1.3143 births + 0.690411 events; upper 4 + 2 + 2
    assert f.known_doses == 4 and f.expected_doses == pytest.approx(4 + MU_BIRTHS + MU_EVENTS)
    assert f.upper_doses == 8


def _input(pregs):
    from clinic.supply.report import FacilityInput

    return FacilityInput(ds.A, "Clinic A", ds.needs(pregs), ds.rate(pregs), [ds.V500], {}, 14)
