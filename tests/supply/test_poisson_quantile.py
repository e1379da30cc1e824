"""The Poisson quantile is computed in pure Python at run time; here it is checked against
scipy.stats.poisson (a reference library, test dependency only) and a few values worked by hand."""
from __future__ import annotations

import math

import pytest
from scipy.stats import poisson

from clinic.supply.errors import SupplyInputError
from clinic.supply.poisson import poisson_cdf, poisson_quantile


@pytest.mark.parametrize("q, mu, k", [
    # Poisson(1): P(X<=1) = e^-1 (1 + 1) = 0.7358 < 0.9; P(X<=2) = 0.7358 + e^-1/2 = 0.9197 >= 0.9 -> 2
    (0.9, 1.0, 2),
    # Poisson(2): P(X<=3) = e^-2 (1 + 2 + 2 + 4/3) = 0.8571; P(X<=4) = 0.8571 + e^-2 * 16/24 = 0.9473 -> 4
    (0.9, 2.0, 4),
    # Poisson(5): P(X<=7) = 0.8666, P(X<=8) = 0.9319 -> 8 (the 0.9 row of a printed cumulative Poisson table)
    (0.9, 5.0, 8),
    # Poisson(0.05): P(X=0) = e^-0.05 = 0.9512 >= 0.9 -> 0 (a rare event does not raise the upper figure)
    (0.9, 0.05, 0),
    # the dataset's events over 12 weeks: mu = 3 * 84 / 365 = 0.690411;
    # P(0) = 0.5014, P(<=1) = 0.5014 * (1 + 0.6904) = 0.8476, P(<=2) = 0.8476 + 0.5014 * 0.6904^2 / 2 = 0.9671 -> 2
    (0.9, 3 * 84 / 365, 2),
])
def test_hand_worked_quantiles(q, mu, k):
    assert poisson_quantile(q, mu) == k


@pytest.mark.parametrize("mu", [0.001, 0.01, 0.1, 0.3, 0.5, 0.690411, 0.9, 1.0, 1.3143, 2.0, 3.7, 7.5, 10.0,
                                25.5, 60.0, 100.0, 333.3, 1000.0, 5000.0])
@pytest.mark.parametrize("q", [0.5, 0.75, 0.8, 0.9, 0.95, 0.975, 0.99])
def test_matches_scipy_ppf(q, mu):
    assert poisson_quantile(q, mu) == int(poisson.ppf(q, mu))


@pytest.mark.parametrize("mu", [0.2, 1.0, 4.4, 50.0])
def test_cdf_matches_scipy(mu):
    for k in range(0, int(mu * 3) + 5):
        assert math.isclose(poisson_cdf(k, mu), poisson.cdf(k, mu), rel_tol=1e-9, abs_tol=1e-12)


def test_a_mean_of_zero_needs_nothing():
    assert poisson_quantile(0.9, 0.0) == 0
    assert poisson_cdf(0, 0.0) == 1.0


@pytest.mark.parametrize("q, mu, field", [(0.0, 1.0, "quantile"), (1.0, 1.0, "quantile"), (1.5, 1.0, "quantile"),
                                          (0.9, -0.1, "mean"), (0.9, float("nan"), "mean"), (0.9, 1e9, "mean")])
def test_out_of_range_inputs_name_the_field(q, mu, field):
    with pytest.raises(SupplyInputError) as e:
        poisson_quantile(q, mu)
    assert field in e.value.errors and "allowed range" in e.value.errors[field]
