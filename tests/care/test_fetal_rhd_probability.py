"""The chance that the fetus is RhD positive, by Hardy-Weinberg equilibrium: with RhD-negative
frequency f = q^2 (q = d allele frequency, p = 1 - q), a man who is RhD positive is DD with
probability p^2 / (1 - q^2) and Dd with 2pq / (1 - q^2), so P(fetus positive) = 1 / (1 + q);
a man of unknown type passes D with probability p = 1 - q. A cell-free fetal RHD result
overrides the estimate."""
import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from clinic.care import CareInputError, fetal_rhd_probability


@pytest.mark.parametrize("f, expected", [
    (0.15, 1 / (1 + math.sqrt(0.15))),   # 0.7208 (Hardy-Weinberg arithmetic)
    (0.16, 1 / 1.4),                      # q = 0.4 -> 0.7143
    (0.01, 1 / 1.1),                      # q = 0.1 -> 0.9091
    (0.09, 1 / 1.3),                      # q = 0.3 -> 0.7692
])
def test_partner_positive_zygosity_unknown(f, expected):
    r = fetal_rhd_probability(rhd_negative_frequency=f)
    assert r["probability"] == pytest.approx(expected, abs=1e-4)


@pytest.mark.parametrize("f, expected", [(0.15, 1 - math.sqrt(0.15)), (0.16, 0.6), (0.25, 0.5)])
def test_partner_unknown_is_a_random_man(f, expected):
    # P(D passed) = p = 1 - q (Hardy-Weinberg)
    r = fetal_rhd_probability(rhd_negative_frequency=f, partner_rhd="unknown")
    assert r["probability"] == pytest.approx(expected, abs=1e-4)


def test_zygosity_known():
    # homozygous DD always passes D; heterozygous Dd half the time (Mendelian inheritance)
    assert fetal_rhd_probability(rhd_negative_frequency=0.15, partner_zygosity="homozygous")["probability"] == 1.0
    assert fetal_rhd_probability(rhd_negative_frequency=0.15, partner_zygosity="heterozygous")["probability"] == 0.5


def test_partner_negative_and_uncertain_paternity():
    assert fetal_rhd_probability(rhd_negative_frequency=0.15, partner_rhd="negative")["probability"] == 0.0
    # paternity not certain: the population estimate 1 - q
    r = fetal_rhd_probability(rhd_negative_frequency=0.16, partner_rhd="negative", paternity_certain=False)
    assert r["probability"] == pytest.approx(0.6)


@pytest.mark.parametrize("fetal, prob, managed", [
    ("negative", 0.0, "negative"),
    ("positive", 1.0, "positive"),
    ("inconclusive", 1 / (1 + math.sqrt(0.15)), "positive"),   # inconclusive -> treat as positive
])
def test_cell_free_fetal_rhd_overrides(fetal, prob, managed):
    r = fetal_rhd_probability(rhd_negative_frequency=0.15, fetal_rhd=fetal)
    assert r["probability"] == pytest.approx(prob, abs=1e-4) and r["managed_as"] == managed


@pytest.mark.parametrize("f", [0, 1, -0.1, 1.5])
def test_frequency_outside_0_1_is_refused(f):
    with pytest.raises(CareInputError) as e:
        fetal_rhd_probability(rhd_negative_frequency=f)
    assert "rhd_negative_frequency" in e.value.errors


@given(st.floats(min_value=1e-6, max_value=1 - 1e-6))
def test_genotype_probabilities_sum_to_one(f):
    q = math.sqrt(f)
    p = 1 - q
    assert p * p + 2 * p * q + q * q == pytest.approx(1.0)
    r = fetal_rhd_probability(rhd_negative_frequency=f)
    assert 0.5 <= r["probability"] <= 1.0   # between heterozygous and homozygous
