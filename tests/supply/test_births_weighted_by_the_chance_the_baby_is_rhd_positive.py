"""A birth ahead counts on the EDD, weighted by the plan's chance that the baby is RhD positive
(Hardy-Weinberg from the population RhD-negative frequency, the partner's typing, or a fetal
RHD result). With f = 0.16: q = 0.4."""
from __future__ import annotations

import pytest

from clinic.care import fetal_rhd_probability
from clinic.supply.forecast import needs_of_plan
from tests.supply import dataset as ds


def _births(p, start=ds.START):
    return [(n.day, n.weight) for n in needs_of_plan(p.plan(), pregnancy=p.pregnancy, start=start, days=84, tz=ds.TZ)
            if n.code == "postpartum-dose"]


def test_partner_known_negative_weighs_zero():
    assert _births(ds.clinic_a()["W2"]) == []


def test_partner_known_positive_weighs_one_over_one_plus_q():
    # 1 / (1 + 0.4) = 0.714286, reported by the engine to 4 places; EDD 1 Jul = day 30
    [(d, w)] = _births(ds.clinic_a()["W3"])
    assert d == 30 and w == pytest.approx(1 / 1.4, abs=1e-4)


def test_partner_unknown_weighs_one_minus_q():
    # a random man passes D with probability 1 - q = 0.6; EDD 12 Jul = day 41
    assert _births(ds.clinic_a()["W4"]) == [(41, 0.6)]


def test_fetal_rhd_negative_weighs_zero():
    assert _births(ds.clinic_a()["W5"]) == []


def test_the_weights_are_the_hardy_weinberg_ones_of_the_engine():
    assert fetal_rhd_probability(rhd_negative_frequency=ds.FREQ, partner_rhd="unknown")["probability"] == 0.6
    assert fetal_rhd_probability(rhd_negative_frequency=ds.FREQ, partner_rhd="positive")["probability"] == 0.7143
    assert fetal_rhd_probability(rhd_negative_frequency=ds.FREQ, partner_rhd="negative")["probability"] == 0.0


def test_born_with_the_dose_still_due_counts_in_full_today():
    assert _births(ds.clinic_a()["W6"]) == [(0, 1.0)]


@pytest.mark.parametrize("days_past_edd, counted", [(0, True), (10, True), (14, True), (15, False), (40, False)])
def test_past_the_edd_a_birth_counts_today_until_42_weeks(days_past_edd, counted):
    # W4's EDD is day 41; forecast from later starts. Up to 14 days past the EDD (42+0) with no
    # birth recorded she may still give birth (day 0); later, the birth was most likely not entered.
    w4 = ds.clinic_a()["W4"]
    start = ds.day(41 + days_past_edd)
    got = [(n.day, n.weight) for n in needs_of_plan(w4.plan(), pregnancy=w4.pregnancy, start=start, days=84,
                                                     tz=ds.TZ) if n.code == "postpartum-dose"]
    assert got == ([(0, 0.6)] if counted else [])
