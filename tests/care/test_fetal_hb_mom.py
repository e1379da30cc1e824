"""Fetal haemoglobin in MoM and the anaemia classes of Mari et al. (NEJM 2000;342:9-14), as
summarised by SMFM Clinical Guideline 8 (2015; SMFM's own summary page: mild 0.83-0.65 MoM,
moderate 0.64-0.55, severe below 0.55), i.e. mild below 0.84 MoM, moderate below 0.65, severe
below 0.55."""
import pytest

from clinic.care import CareInputError, fetal_hb_median, fetal_hb_result, fetal_hb_severity, load_profile
from clinic.care.calc import FETAL_HB_MEDIAN_G_DL

BSH = load_profile("bsh-2014")


def test_cli_example_8_g_dl_at_28_weeks_is_moderate():
    # median at 28 weeks 12.6 g/dL (Mari 2000 reference table, read in a published reproduction;
    # corrected from 12.4): 8.0 / 12.6 = 0.635 MoM, below 0.65 and not below 0.55 -> moderate
    # (SMFM Clinical Guideline 8 summary of Mari 2000: moderate 0.64-0.55 MoM)
    r = fetal_hb_result(8.0, 28 * 7, BSH)
    assert r["median_g_dl"] == pytest.approx(12.6)
    assert r["mom"] == pytest.approx(8.0 / 12.6, abs=1e-4)
    assert r["severity"] == "moderate"


def test_median_rises_with_gestation_and_is_interpolated():
    # Mari 2000 reference table: median fetal Hb rises through pregnancy (10.6 g/dL at 18 weeks to
    # 13.8 at 40); halfway between two listed weeks the linear interpolation is the mean of the two.
    ws = sorted(FETAL_HB_MEDIAN_G_DL)
    assert all(FETAL_HB_MEDIAN_G_DL[a] < FETAL_HB_MEDIAN_G_DL[b] for a, b in zip(ws, ws[1:], strict=False))
    assert fetal_hb_median(29 * 7) == pytest.approx((FETAL_HB_MEDIAN_G_DL[28] + FETAL_HB_MEDIAN_G_DL[30]) / 2)


@pytest.mark.parametrize("mom, severity", [
    (0.90, "none"),
    (0.84, "none"),      # not below 0.84 (a value on a threshold falls in the milder class: common practice)
    (0.83, "mild"),      # below 0.84 MoM: mild (Mari 2000; SMFM summary: mild 0.83-0.65)
    (0.65, "mild"),
    (0.64, "moderate"),  # below 0.65 MoM: moderate (Mari 2000)
    (0.55, "moderate"),
    (0.54, "severe"),    # below 0.55 MoM: severe (Mari 2000)
])
def test_mom_classes(mom, severity):
    assert fetal_hb_severity(mom, BSH) == severity


@pytest.mark.parametrize("hb, ga", [(0.5, 196), (26, 196), (10, 17 * 7), (10, 41 * 7)])
def test_out_of_range_input_is_refused(hb, ga):
    with pytest.raises(CareInputError):
        fetal_hb_result(hb, ga, BSH)
