"""Anti-D for a fetomaternal haemorrhage: the bleed from a Kleihauer-Betke count or a flow
cytometry %, the dose by the profile's rule, and whole vials."""
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from clinic.care import CareInputError, fmh_result, fmh_volume, load_profile, nadler_blood_volume_ml, vials_for

ACOG = load_profile("acog-2017")
BSH = load_profile("bsh-2014")


def test_bleed_volume_is_fraction_times_maternal_volume():
    # fetal whole blood = fetal cells / cells counted x maternal blood volume; red cells = half
    # (ACOG PB 181, 2017: 30 mL whole blood = 15 mL red cells, from memory).
    v = fmh_volume(fetal_cells=30, cells_counted=2000, maternal_volume_ml=5000)
    assert v["fetal_whole_blood_ml"] == pytest.approx(75.0)    # 0.015 x 5000
    assert v["fetal_red_cells_ml"] == pytest.approx(37.5)


@pytest.mark.parametrize("percent, vials", [
    # AABB Technical Manual worked example of the vial rule (from memory; Sandler & Gottschall,
    # Obstet Gynecol 2012, abstract: one 300 µg vial per 30 mL fetal whole blood, with an extra vial
    # added in borderline cases): 1.5 % fetal cells x 5000 mL = 75 mL; 75 / 30 = 2.5 -> round up
    # to 3, add one = 4 vials of 300 µg.
    (1.5, 4),
    # 1.3 % -> 65 mL; 65 / 30 = 2.17 -> round down to 2, add one = 3 vials (same rule, from memory)
    (1.3, 3),
    # 0.3 % -> 15 mL; 0.5 -> round up to 1, add one = 2 vials (same rule)
    (0.3, 2),
    # 0.1 % -> 5 mL; 0.17 -> round down to 0, add one = 1 vial (same rule)
    (0.1, 1),
])
def test_acog_vial_rounding_rule(percent, vials):
    r = fmh_result(profile=ACOG, fetal_cell_percent=percent, maternal_volume_ml=5000)
    assert r["vials"] == vials
    assert r["dose_iu"] == vials * 1500 and r["dose_ug"] == vials * 300   # 300 µg = 1500 IU vials


def test_cli_example_30_of_2000_cells():
    a = fmh_result(profile=ACOG, fetal_cells=30, cells_counted=2000, maternal_volume_ml=5000)
    assert (a["fetal_whole_blood_ml"], a["fetal_red_cells_ml"], a["vials"], a["dose_ug"]) == (75.0, 37.5, 4, 1200.0)
    b = fmh_result(profile=BSH, fetal_cells=30, cells_counted=2000, maternal_volume_ml=5000)
    # BSH 2014: 125 IU per mL of fetal red cells IM (from memory): 37.5 x 125 = 4687.5 -> 4688 IU
    assert b["dose_iu"] == 4688 and b["vials"] == 4      # 4 x 1500 IU vials cover 4688 IU


@pytest.mark.parametrize("red_cells_ml, route, iu", [
    (4.0, "IM", 500),    # BSH 2014: 500 IU covers 4 mL of fetal red cells (from memory)
    (2.0, "IM", 500),    # at least 500 IU (BSH 2014, from memory)
    (10.0, "IM", 1250),  # 125 IU per mL IM (BSH 2014, from memory): 10 x 125
    (10.0, "IV", 1000),  # 100 IU per mL IV (BSH 2014, from memory): 10 x 100
    (20.0, "IM", 2500),  # 20 mL x 125 IU/mL
])
def test_bsh_iu_per_ml_rule(red_cells_ml, route, iu):
    # red cells = half the whole blood; whole blood = % x 5000 mL -> % = red x 2 / 50
    pct = red_cells_ml * 2 / 50
    r = fmh_result(profile=BSH, fetal_cell_percent=pct, maternal_volume_ml=5000, route=route)
    assert r["fetal_red_cells_ml"] == pytest.approx(red_cells_ml)
    assert r["dose_iu"] == iu
    assert r["dose_ug"] == pytest.approx(iu / 5)   # 1 µg = 5 IU (WHO standard; BSH 2014)


def test_vials_per_stocked_product():
    r = fmh_result(profile=BSH, fetal_cell_percent=0.8, maternal_volume_ml=5000, vial_sizes_iu=(1500, 1250, 500))
    # 0.8 % x 5000 = 40 mL whole blood = 20 mL red cells -> 2500 IU (BSH 125 IU/mL)
    assert [(v["vial_iu"], v["vials"]) for v in r["vials_by_product"]] == [(1500, 2), (1250, 2), (500, 5)]


def test_large_dose_warns_to_consider_iv():
    # common practice: more than the profile's IM limit at once -> consider an IV product
    r = fmh_result(profile=BSH, fetal_cell_percent=3.0, maternal_volume_ml=5000)   # 75 mL red cells
    assert r["dose_iu"] == 9375 and r["warnings"] and "IV" in r["warnings"][0]


def test_nadler_blood_volume():
    # Nadler, Hidalgo, Bloch, Surgery 1962;51:224-232, women: 0.3561 H^3 + 0.03308 W + 0.1833 (L)
    # 1.60 m, 60 kg: 0.3561 x 4.096 + 0.03308 x 60 + 0.1833 = 3.6267 L
    assert nadler_blood_volume_ml(160, 60) == pytest.approx(3626.7, abs=0.1)


def test_counts_and_percent_together_are_refused():
    with pytest.raises(CareInputError):
        fmh_volume(fetal_cells=3, cells_counted=1000, fetal_cell_percent=0.3)


def test_more_fetal_cells_than_counted_is_refused():
    with pytest.raises(CareInputError) as e:
        fmh_volume(fetal_cells=2001, cells_counted=2000)
    assert "fetal_cells" in e.value.errors


@settings(max_examples=200, deadline=None)
@given(pct=st.floats(min_value=0, max_value=10, allow_nan=False),
       mbv=st.floats(min_value=2000, max_value=10000, allow_nan=False),
       vial=st.sampled_from([250, 500, 1250, 1500, 2500, 5000]),
       prof=st.sampled_from([ACOG, BSH]), route=st.sampled_from(["IM", "IV"]))
def test_dose_is_positive_and_vials_whole_and_enough(pct, mbv, vial, prof, route):
    if prof is ACOG and route == "IV":
        route = "IM"   # the ACOG profile has no IV rate: the product label rules
    r = fmh_result(profile=prof, fetal_cell_percent=pct, maternal_volume_ml=mbv, route=route, vial_sizes_iu=(vial,))
    assert r["dose_iu"] > 0 and isinstance(r["dose_iu"], int)
    v = r["vials_by_product"][0]
    assert isinstance(v["vials"], int) and v["vials"] >= 1
    assert v["vials"] * vial >= r["dose_iu"] > (v["vials"] - 1) * vial


@settings(max_examples=100, deadline=None)
@given(dose=st.integers(min_value=1, max_value=50000), vial=st.integers(min_value=50, max_value=15000))
def test_vials_for_always_whole_and_sufficient(dose, vial):
    n = vials_for(dose, vial)
    assert isinstance(n, int) and n * vial >= dose and (n - 1) * vial < dose
