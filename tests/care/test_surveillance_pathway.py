"""The surveillance pathway for red cell antibodies: critical titre (ACOG / SMFM Clinical
Guideline 8, 2015: 1:16 for anti-D, any titre for anti-K; from memory), BSH 2016 quantitation
(White et al.: anti-D below 4 IU/mL low, 4-15 moderate -> refer, above 15 high; from memory),
the titre trend (a rise of two dilutions or more is significant), repeat intervals (every 4
weeks to 28 weeks, then every 2), MCA Doppler in MoM (Mari 2000) and next steps."""
from datetime import timedelta

import pytest

from clinic.care import antibody_risk, load_profile, mca_psv_median, titre_rise
from tests.care.builders import alert_codes, booked_negative, item, make_plan, rec, screen, utc

ACOG = load_profile("acog-2017")
BSH = load_profile("bsh-2014")


def _ab(sampled_at, name="anti-D", titre=None, **kw):
    extra = {"titre": titre, "titre_antibody": name} if titre else {}
    return screen(sampled_at, "positive", antibodies=[name], anti_d_origin="immune" if name == "anti-D" else None,
                  **{k: v for k, v in {**extra, **kw}.items() if v is not None})


@pytest.mark.parametrize("name, titre, critical", [
    ("anti-D", 8, False), ("anti-D", 16, True),   # ACOG/SMFM 2015: critical titre 1:16 (from memory)
    ("anti-c", 8, False), ("anti-c", 16, True),
    ("anti-K", 1, True), ("anti-K", None, True),  # Kell: any titre (SMFM 2015, from memory)
])
def test_acog_critical_titres(name, titre, critical):
    assert antibody_risk(name, titre, None, ACOG)["critical"] is critical


@pytest.mark.parametrize("iu_ml, level, critical", [
    # below 4 IU/mL: low risk (BSH 2016, from memory; the 4 IU/mL cut-off matches Bowell et al., BMJ 1982)
    (3.9, "low", False),
    (4.0, "moderate", True),    # 4-15 IU/mL: moderate, refer (BSH 2016, from memory)
    (15.0, "moderate", True),
    (15.1, "high", True),       # above 15 IU/mL: high (BSH 2016, from memory)
])
def test_bsh_anti_d_quantitation(iu_ml, level, critical):
    r = antibody_risk("anti-D", 8, iu_ml, BSH)
    assert (r["level"], r["critical"]) == (level, critical)


@pytest.mark.parametrize("a, b, significant", [
    (4, 16, True),    # two dilutions (four-fold): significant (SMFM 2015 / BSH 2016, from memory)
    (4, 8, False),    # one dilution: within the variation of the test
    (8, 64, True), (16, 16, False), (16, 8, False),
])
def test_titre_rise_of_two_dilutions(a, b, significant):
    assert titre_rise(a, b, 2) is significant


def test_rising_titre_alert_in_the_plan():
    e = booked_negative()[:1] + [_ab("2026-05-01T09:00:00Z", titre=2), _ab("2026-05-29T09:00:00Z", titre=8)]
    plan = make_plan(e, now=utc(2026, 5, 30), profile="acog-2017")
    assert "titre-rise" in alert_codes(plan)
    assert plan.pathway == "surveillance"


# acog-2017: titres every 4 weeks (SMFM Clinical Guideline 8 summary page); every 2 weeks from
# 28+0 (from memory; the summary says "more frequently" later in pregnancy)
@pytest.mark.parametrize("sampled, due", [
    (utc(2026, 7, 19, 9), utc(2026, 8, 16, 9)),   # at 20+0: next in 4 weeks (24+0)
    (utc(2026, 8, 30, 9), utc(2026, 9, 13, 9)),   # at 26+0: 4 weeks would pass 28+0 -> 2 weeks, at 28+0
    (utc(2026, 9, 20, 9), utc(2026, 10, 4, 9)),   # at 29+0: every 2 weeks
])
def test_titre_follow_up_interval(sampled, due):
    e = booked_negative()[:1] + [_ab(f"{sampled:%Y-%m-%dT%H:%M:%SZ}", titre=4)]
    plan = make_plan(e, now=sampled + timedelta(days=1), profile="acog-2017")
    assert item(plan, "surveillance-titre").due == due


def test_critical_titre_refers_and_starts_doppler():
    e = booked_negative()[:1] + [_ab("2026-07-19T09:00:00Z", titre=32)]
    plan = make_plan(e, now=utc(2026, 7, 20), profile="acog-2017")
    assert item(plan, "surveillance-referral").state == "due"
    assert item(plan, "surveillance-doppler").state == "due"     # 20+1, after 18+0
    assert item(plan, "surveillance-titre").state == "not-needed"
    assert "antibody-critical" in alert_codes(plan) and "delivery-timing" in alert_codes(plan)
    ref = rec("referral", referred_on="2026-07-20", to_facility="Fetal medicine unit", reason="anti-D 1:32")
    plan = make_plan(e + [ref], now=utc(2026, 7, 21), profile="acog-2017")
    assert item(plan, "surveillance-referral").state == "done"


def test_high_mca_psv_suggests_fetal_blood_sampling():
    # SMFM Clinical Guideline 8 (2015), abstract recommendation 4: MCA greater than 1.5 MoM ->
    # fetal blood sampling
    ga = 26 * 7
    psv = round(1.6 * mca_psv_median(ga), 1)
    e = booked_negative()[:1] + [_ab("2026-07-19T09:00:00Z", titre=32),
                                 rec("doppler", measured_at="2026-08-30T09:00:00Z", mca_psv_cm_s=psv)]
    plan = make_plan(e, now=utc(2026, 8, 30, 12), profile="acog-2017")
    a = [x for x in plan.alerts if x.code == "mca-psv"][0]
    assert a.severity == "danger" and "fetal blood sampling" in a.message
    assert item(plan, "surveillance-doppler").due == utc(2026, 9, 6, 9)   # weekly


def test_fetal_hb_result_is_classified():
    e = booked_negative()[:1] + [_ab("2026-07-19T09:00:00Z", titre=32),
                                 rec("fbs", sampled_at="2026-09-13T09:00:00Z", hb_g_dl=6.5)]
    plan = make_plan(e, now=utc(2026, 9, 13, 12), profile="acog-2017")
    a = [x for x in plan.alerts if x.code == "fetal-hb"][0]
    # 6.5 / 12.6 (Mari 2000 median at 28 weeks, from the published table) = 0.52 MoM: severe (below 0.55)
    assert a.severity == "danger" and "severe" in a.message


def test_non_d_antibody_keeps_anti_d_prophylaxis():
    # anti-c or anti-K does not protect against anti-D: prophylaxis continues alongside surveillance
    e = booked_negative()[:1] + [screen("2026-05-01T09:00:00Z", "positive", antibodies=["anti-c"], titre=4,
                                        titre_antibody="anti-c")]
    plan = make_plan(e, now=utc(2026, 9, 14))
    assert plan.pathway == "surveillance"
    assert item(plan, "routine-dose-1").state == "due"


def test_immune_anti_d_stops_prophylaxis():
    e = booked_negative()[:1] + [_ab("2026-05-01T09:00:00Z", titre=8)]
    plan = make_plan(e, now=utc(2026, 9, 14))
    assert plan.pathway == "surveillance"
    for code in ("routine-dose-1", "routine-dose-2", "postpartum-dose"):
        assert item(plan, code).state == "not-needed"


@pytest.mark.parametrize("mom,closes", [
    # Below 1.29 MoM: repeat in 1-2 weeks, so the deadline is two weekly intervals after the scan.
    (1.10, utc(2026, 9, 13, 9)),
    # From 1.29 MoM (Mari et al. NEJM 2000, from memory) the repeat is within one interval: the
    # deadline is the due date, a week after the scan (SMFM Clinical Guideline 8, 2015: weekly).
    (1.35, utc(2026, 9, 6, 9)),
])
def test_doppler_deadline_tightens_from_the_mild_threshold(mom, closes):
    ga = 26 * 7
    psv = round(mom * mca_psv_median(ga), 1)
    e = booked_negative()[:1] + [_ab("2026-07-19T09:00:00Z", titre=32),
                                 rec("doppler", measured_at="2026-08-30T09:00:00Z", mca_psv_cm_s=psv)]
    plan = make_plan(e, now=utc(2026, 8, 30, 12), profile="acog-2017")
    it = item(plan, "surveillance-doppler")
    assert it.due == utc(2026, 9, 6, 9)
    assert it.closes == closes
