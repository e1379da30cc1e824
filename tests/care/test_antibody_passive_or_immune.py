"""Anti-D found in the mother: probable passive anti-D (prophylaxis given within the profile's
window, low level) versus immune sensitisation. BSH 2016 (White et al., from memory): passive
anti-D after prophylaxis is usually below 0.2 IU/mL; ACOG PB 181 (2017, from memory): titre
1:4 or less. Passive anti-D can be detected for up to about 12 weeks (common practice)."""
from tests.care.builders import alert_codes, booked_negative, dose, item, make_plan, screen, utc

ROUTINE = [screen("2026-09-13T08:00:00Z"), dose("2026-09-13T09:00:00Z", 500)]   # 28+0


def _anti_d(sampled_at="2026-10-04T09:00:00Z", **kw):    # 31+0
    return screen(sampled_at, "positive", antibodies=["anti-D"], **kw)


def test_low_level_after_recent_prophylaxis_is_probably_passive():
    plan = make_plan(booked_negative() + ROUTINE + [_anti_d(anti_d_iu_ml=0.1)], now=utc(2026, 10, 26))
    assert plan.pathway == "prophylaxis"
    assert plan.antibodies[0]["origin"] == "probable-passive"
    assert "anti-d-passive" in alert_codes(plan)
    assert item(plan, "routine-dose-2").state == "due"    # prophylaxis continues


def test_level_above_the_passive_limit_is_immune():
    plan = make_plan(booked_negative() + ROUTINE + [_anti_d(anti_d_iu_ml=1.0)], now=utc(2026, 10, 26))
    assert plan.pathway == "surveillance"
    assert "immune-anti-d" in alert_codes(plan)
    assert item(plan, "routine-dose-2").state == "not-needed"
    assert item(plan, "postpartum-dose").state == "not-needed"


def test_anti_d_without_any_recent_dose_is_immune():
    plan = make_plan(booked_negative() + [_anti_d("2026-06-01T09:00:00Z", titre=2, titre_antibody="anti-D")],
                     now=utc(2026, 6, 2))
    assert plan.antibodies[0]["origin"] == "immune" and plan.pathway == "surveillance"


def test_no_level_after_recent_dose_is_undetermined_and_prophylaxis_continues():
    plan = make_plan(booked_negative() + ROUTINE + [_anti_d()], now=utc(2026, 10, 26))
    assert plan.antibodies[0]["origin"] == "undetermined"
    assert "anti-d-undetermined" in alert_codes(plan)
    assert item(plan, "routine-dose-2").state == "due"


def test_acog_titre_of_1_4_after_prophylaxis_is_passive():
    plan = make_plan(booked_negative() + ROUTINE + [_anti_d(titre=4, titre_antibody="anti-D")],
                     now=utc(2026, 10, 5), profile="acog-2017")
    assert plan.antibodies[0]["origin"] == "probable-passive"
    plan = make_plan(booked_negative() + ROUTINE + [_anti_d(titre=8, titre_antibody="anti-D")],
                     now=utc(2026, 10, 5), profile="acog-2017")
    assert plan.antibodies[0]["origin"] == "immune"


def test_the_laboratory_judgement_wins():
    plan = make_plan(booked_negative() + ROUTINE + [_anti_d(anti_d_iu_ml=0.1, anti_d_origin="immune")],
                     now=utc(2026, 10, 26))
    assert plan.pathway == "surveillance"


def test_done_items_stay_done_after_sensitisation():
    plan = make_plan(booked_negative() + ROUTINE + [_anti_d(anti_d_iu_ml=1.0)], now=utc(2026, 10, 26))
    assert item(plan, "routine-dose-1").state == "done"
