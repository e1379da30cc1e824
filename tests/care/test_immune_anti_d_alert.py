"""The alert immune-anti-d: the engine's own judgement that anti-D in the mother is immune
(sensitisation), naming the screen records. The laboratory's judgement is used where it is
recorded; otherwise the engine judges from the level and the anti-D given before (BSH 2016,
White et al., from memory: passive anti-D is usually below 0.2 IU/mL; passive anti-D may be
found up to about 12 weeks = 84 days after a dose: common practice; titre 1:4 or less: common
practice). A disagreement between the two is a warning, anti-d-origin-check."""
from tests.care.builders import alert_codes, booked_negative, dose, make_plan, screen, utc

ROUTINE = [screen("2026-09-13T08:00:00Z"), dose("2026-09-13T09:00:00Z", 500)]   # 28+0


def _anti_d(sampled_at="2026-10-04T09:00:00Z", **kw):    # 31+0, 21 days after the routine dose
    return screen(sampled_at, "positive", antibodies=["anti-D"], **kw)


def test_immune_anti_d_alert_without_the_laboratory_judgement_when_no_dose_was_given():
    # no anti-D in the 84 days before the sample (common practice): it cannot be passive
    s = _anti_d("2026-06-01T09:00:00Z", titre=2, titre_antibody="anti-D")
    plan = make_plan(booked_negative() + [s], now=utc(2026, 6, 2))
    (a,) = plan.alerts_with("immune-anti-d")
    assert (a.severity, a.record_ids) == ("danger", [s["id"]])
    assert plan.pathway == "surveillance"


def test_immune_anti_d_alert_when_the_level_is_above_the_passive_limit():
    # 1.0 IU/mL > 0.2 IU/mL (BSH 2016, from memory) despite a dose 21 days before
    s = _anti_d(anti_d_iu_ml=1.0)
    (a,) = make_plan(booked_negative() + ROUTINE + [s], now=utc(2026, 10, 5)).alerts_with("immune-anti-d")
    assert a.record_ids == [s["id"]]


def test_no_immune_anti_d_alert_for_probable_passive_anti_d():
    # 0.1 IU/mL <= 0.2 IU/mL, 21 days after a dose (within 84 days): probably passive
    plan = make_plan(booked_negative() + ROUTINE + [_anti_d(anti_d_iu_ml=0.1)], now=utc(2026, 10, 5))
    assert "immune-anti-d" not in alert_codes(plan) and "anti-d-passive" in alert_codes(plan)


def test_one_immune_anti_d_alert_names_every_immune_screen_first_first():
    first = _anti_d("2026-06-01T09:00:00Z", titre=8, titre_antibody="anti-D")
    later = _anti_d("2026-07-01T09:00:00Z", titre=16, titre_antibody="anti-D")
    plan = make_plan(booked_negative() + [later, first], now=utc(2026, 7, 2))
    (a,) = plan.alerts_with("immune-anti-d")
    assert a.record_ids == [first["id"], later["id"]]


def test_laboratory_passive_without_any_recorded_dose_is_flagged_not_overruled():
    # the laboratory may know of anti-D given elsewhere: its judgement stands, with a warning
    s = _anti_d("2026-06-01T09:00:00Z", titre=2, titre_antibody="anti-D", anti_d_origin="passive")
    plan = make_plan(booked_negative() + [s], now=utc(2026, 6, 2))
    assert "immune-anti-d" not in alert_codes(plan) and plan.pathway == "prophylaxis"
    (w,) = plan.alerts_with("anti-d-origin-check")
    assert w.severity == "warning" and w.record_ids == [s["id"]]


def test_laboratory_immune_at_a_passive_looking_level_is_used_and_flagged():
    s = _anti_d(anti_d_iu_ml=0.1, anti_d_origin="immune")
    plan = make_plan(booked_negative() + ROUTINE + [s], now=utc(2026, 10, 5))
    assert plan.alerts_with("immune-anti-d")[0].record_ids == [s["id"]]
    assert "anti-d-origin-check" in alert_codes(plan)
