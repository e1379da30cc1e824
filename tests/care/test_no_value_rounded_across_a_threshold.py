"""No value is rounded across a threshold (issue 11 rule 5): a MoM, a titre trend or a
percentage is printed with enough digits never to read as the threshold it falls short of.

Thresholds: MCA-PSV 1.29 / 1.50 / 1.55 MoM (Mari et al., NEJM 2000;342:9-14, from memory) and
refer above 1.5 MoM (SMFM Clinical Guideline 8 (2015), abstract recommendation 4, read); fetal
Hb 0.84 / 0.65 / 0.55 MoM (Mari 2000 classes as reproduced in the SMFM Guideline 8 summary,
read); a report percentage never reads 100.0 % for not all nor 0.0 % for some (common practice).
"""
import math

import pytest

from clinic.care import load_profile
from clinic.care.calc import fetal_hb_median, fetal_hb_result, mca_psv_median, mca_result
from clinic.care.formatting import digits_against, format_against, round_against
from clinic.reports.month import percentage, percentage_text

BSH = load_profile("bsh-2014")


@pytest.mark.parametrize("value, threshold, text", [
    (1.4999, 1.50, "1.4999 (just below 1.50)"),
    (1.50, 1.50, "1.50"),
    (1.5004, 1.50, "1.5004 (just above 1.50)"),
    (1.2, (1.29, 1.50, 1.55), "1.20"),
    (1.28996, (1.29, 1.50, 1.55), "1.28996 (just below 1.29)"),
    (0.8399, 0.84, "0.8399 (just below 0.84)"),
    (1.4999999999, 1.50, "1.50"),   # within 1e-9: the calculators count it as at the threshold
])
def test_format_against(value, threshold, text):
    assert format_against(value, threshold) == text


def test_rounding_helpers_agree_with_the_printed_text():
    assert digits_against(1.4999, 1.5) == 4 and round_against(1.4999, 1.5) == 1.4999
    assert format_against(3.96, (4.0, 15.0), 1, trim=True, note=False) == "3.96"
    assert format_against(12.0, (4.0, 15.0), 1, trim=True) == "12"


def _psv_for(mom, ga_days):
    return mom * mca_psv_median(ga_days)


def test_an_mca_mom_just_below_1_50_does_not_read_as_1_50():
    # 28+0: PSV at 1.4999 x the Mari median; moderate from 1.50 MoM (from memory), refer from 1.5
    r = mca_result(_psv_for(1.49996, 196), 196, BSH)
    assert r["severity"] == "mild" and r["refer"] is False
    assert r["mom_text"] == "1.49996 (just below 1.50)"
    assert r["mom"] < 1.5           # the figure in the API is not rounded onto the threshold either
    exactly = mca_result(_psv_for(1.50, 196), 196, BSH)
    assert exactly["mom_text"] == "1.50" and exactly["refer"] is True
    assert "MCA-PSV 1.50 MoM is at or above 1.50 MoM" in exactly["suggestion"]


def test_a_fetal_hb_mom_just_above_0_84_does_not_read_as_0_84():
    # 28+0: median 12.6 g/dL (Mari 2000 table as reproduced); mild anaemia below 0.84 MoM
    hb = 0.84004 * fetal_hb_median(196)
    r = fetal_hb_result(hb, 196, BSH)
    assert r["severity"] == "none" and r["mom_text"] == "0.84004 (just above 0.84)"


def test_the_surveillance_alert_prints_the_safe_figure():
    from tests.care.builders import booked_negative, make_plan, rec, screen, utc

    s = screen("2026-06-01T09:00:00Z", "positive", antibodies=["anti-D"], titre=64, titre_antibody="anti-D",
               anti_d_iu_ml=20.0, anti_d_origin="immune")
    # 2026-09-13 is 28+0 in the standard pregnancy
    d = rec("doppler", measured_at="2026-09-13T10:00:00Z", mca_psv_cm_s=round(_psv_for(1.28996, 196), 6))
    plan = make_plan(booked_negative() + [s, d], now=utc(2026, 9, 14))
    (a,) = plan.alerts_with("mca-psv")
    mom = float(d["mca_psv_cm_s"]) / mca_psv_median(196)
    assert mom < 1.29 and "(just below 1.29)" in a.message and "1.29 MoM" not in a.message.split("(just")[0]


def test_a_titre_trend_prints_whole_dilutions():
    # titres are doubling dilutions (1:N, N a power of two): the rise is a whole number
    assert format_against(math.log2(64 / 16), 2, 0, note=False) == "2"


@pytest.mark.parametrize("num, den, value, text", [
    (1999, 2000, 99.95, "99.95"),   # not "100.0": one woman was not covered
    (1, 2000, 0.1, "0.1"),          # 0.05 rounds half up to 0.1: not "none"
    (1, 30000, 0.003, "0.003"),     # not "0.0": one woman was
    (2000, 2000, 100.0, "100.0"),
    (0, 2000, 0.0, "0.0"),
    (1, 3, 33.3, "33.3"),           # one decimal, halves rounded up, as before
    (2, 3, 66.7, "66.7"),
    (19999, 20000, 99.995, "99.995"),
])
def test_report_percentages_never_read_as_all_or_none_when_they_are_not(num, den, value, text):
    assert percentage(num, den) == value
    assert percentage_text(percentage(num, den)) == text


def test_the_vial_working_never_reads_as_the_half_vial_it_falls_short_of():
    # AABB vial rule (from memory; Sandler & Gottschall 2012, abstract): bleed / 30 mL, round
    # (.5 up), add one. 14.997 mL is 0.4999 of a vial: it rounds down, so it must not read 0.50
    from clinic.care.calc import fmh_dose_iu

    acog = load_profile("acog-2017")
    iu, how = fmh_dose_iu(14.997, 7.4985, acog)
    assert iu == 1500 and "14.997 mL" in how and "0.4999 (just below 0.50)" in how
    iu, how = fmh_dose_iu(15.0, 7.5, acog)
    assert iu == 3000 and "15.0 mL / 30 mL per 300 µg = 0.50;" in how
