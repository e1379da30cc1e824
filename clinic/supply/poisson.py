"""The Poisson quantile, in pure Python (no scipy at run time).

``poisson_quantile(q, mu)`` is the smallest whole number k with P(X <= k) >= q for X ~ Poisson(mu),
the same definition as ``scipy.stats.poisson.ppf`` (a test compares the two).
"""
from __future__ import annotations

import math

from clinic.supply.errors import SupplyInputError

# Large enough for any clinic or district: a mean of 100 000 doses in one horizon.
MAX_MEAN = 100_000.0


def _check(q: float, mu: float) -> None:
    if not isinstance(q, (int, float)) or not 0 < q < 1:
        raise SupplyInputError("quantile", f"{q!r}: allowed range is above 0 and below 1")
    if not isinstance(mu, (int, float)) or math.isnan(mu) or not 0 <= mu <= MAX_MEAN:
        raise SupplyInputError("mean", f"{mu!r}: allowed range 0 to {MAX_MEAN:g}")


def poisson_cdf(k: int, mu: float) -> float:
    """P(X <= k) for X ~ Poisson(mu)."""
    _check(0.5, mu)
    if k < 0:
        return 0.0
    if mu == 0:
        return 1.0
    total, log_mu = 0.0, math.log(mu)
    for i in range(int(k) + 1):
        # Each term in logs, so a large mean does not underflow exp(-mu) to zero.
        total += math.exp(-mu + i * log_mu - math.lgamma(i + 1))
    return min(1.0, total)


def poisson_quantile(q: float, mu: float) -> int:
    """Smallest k with P(X <= k) >= q, X ~ Poisson(mu); 0 when mu is 0."""
    _check(q, mu)
    if mu == 0:
        return 0
    log_mu = math.log(mu)
    total, k = 0.0, 0
    # The quantile lies far below mu + 40 sqrt(mu) + 40 for any q this module accepts.
    limit = int(mu + 40 * math.sqrt(mu) + 40)
    while k <= limit:
        total += math.exp(-mu + k * log_mu - math.lgamma(k + 1))
        # A relative tolerance so that summing rounding error cannot push a q exactly on a
        # step of the distribution past it.
        if total >= q * (1 - 1e-12):
            return k
        k += 1
    return limit
