"""A positive antibody screen is never silent (issue 11 rule 1).

BSH 2016 (White J et al., Guideline for blood grouping and red cell antibody testing in
pregnancy, Transfus Med 2016;26:246-263), abstract (read): antibodies with the potential to be
clinically significant are detected at booking and 28 weeks; anti-D, anti-K and anti-c carry
significant fetal and neonatal risk; once detected an antibody is identified and its level
measured (quantified for anti-D and anti-c, titrated otherwise). The profile lists of
clinically significant and not significant antibodies beyond anti-D, anti-c and anti-K, and
the 7 days allowed for identification: from memory / common practice (see the profile files).
"""
from datetime import timedelta

import pytest

from clinic.care import load_profile
from clinic.care.planning.antibodies import antibody_name, significance
from tests.care.builders import alert_codes, booked_negative, dose, item, make_plan, screen, typing, utc

POS_SCREEN_AT = "2026-05-01T09:00:00Z"   # the booking sample, 8+5


def _positive(sampled_at=POS_SCREEN_AT, **kw):
    return screen(sampled_at, "positive", **kw)


def _booked_positive(**kw):
    return [typing("negative"), _positive(**kw)]


def test_positive_screen_without_an_antibody_opens_an_identification_task_and_an_alert():
    s = _positive(id="s-pos")
    plan = make_plan([typing("negative"), s], now=utc(2026, 5, 3))
    it = item(plan, "antibody-identification")
    assert it.code == "antibody-identification:s-pos" and it.related_id == "s-pos"
    assert it.state == "due" and it.category == "screen"
    assert "no antibody is named" in it.reason and "titre or quantify" in it.reason
    # 7 days to identify it (common practice)
    assert it.closes == utc(2026, 5, 8, 9)
    assert "antibody-unidentified" in alert_codes(plan)
    (a,) = plan.alerts_with("antibody-unidentified")
    assert a.severity == "warning" and a.record_ids == ["s-pos"]


def test_an_unidentified_antibody_is_overdue_after_a_week_and_stays_open():
    plan = make_plan(_booked_positive(), now=utc(2026, 5, 9))
    assert item(plan, "antibody-identification").state == "overdue"
    # still open at the birth and after: the answer matters for the baby and her next pregnancy
    assert item(make_plan(_booked_positive(), now=utc(2026, 12, 20)), "antibody-identification").state == "overdue"


def test_routine_prophylaxis_stays_offered_until_anti_d_is_shown_immune():
    # BSH 2016 (White et al.), abstract: the risk of confusing immune anti-D with passive; the
    # engine stops prophylaxis only for anti-D judged immune
    plan = make_plan(_booked_positive() + [screen("2026-09-13T08:00:00Z")], now=utc(2026, 9, 14))
    assert item(plan, "routine-dose-1").state == "due" and plan.pathway == "prophylaxis"


def test_a_later_screen_that_identifies_the_antibody_closes_the_task_as_done():
    later = _positive("2026-05-05T09:00:00Z", antibodies=["anti-c"], titre=4, id="s-id")
    plan = make_plan(_booked_positive() + [later], now=utc(2026, 5, 6))
    it = item(plan, "antibody-identification")
    assert (it.state, it.done_record_id, it.timeliness) == ("done", "s-id", "on-time")
    assert "anti-c" in it.reason
    assert "antibody-unidentified" not in alert_codes(plan)
    assert plan.pathway == "surveillance"       # anti-c is clinically significant (BSH 2016 abstract)


def test_a_later_negative_screen_does_not_answer_it():
    plan = make_plan(_booked_positive() + [screen("2026-05-20T09:00:00Z")], now=utc(2026, 5, 21))
    it = item(plan, "antibody-identification")
    assert it.state == "overdue" and "later screen on 2026-05-20 was negative" in it.reason


def test_one_task_for_repeated_unidentified_screens():
    plan = make_plan(_booked_positive(id="s1") + [_positive("2026-05-04T09:00:00Z", id="s2")], now=utc(2026, 5, 5))
    codes = [i.code for i in plan.items if i.code.startswith("antibody-identification")]
    assert codes == ["antibody-identification:s1"]


def test_other_without_a_name_is_of_unknown_significance():
    # a stored record from before "other" needed a name (validation now asks for it)
    s = _positive(antibodies=["anti-c"], id="s-other")
    s["antibodies"] = ["other"]
    plan = make_plan([typing("negative"), s], now=utc(2026, 5, 3))
    it = item(plan, "antibody-identification")
    assert it.state == "due" and "has no name" in it.reason
    assert plan.pathway == "prophylaxis"


@pytest.mark.parametrize("name, pathway, task", [
    ("Jk(a)", "surveillance", False),   # anti-Jka, clinically significant (BSH 2016, from memory)
    ("anti-Lea", "prophylaxis", False),   # not clinically significant in pregnancy (BSH 2016, from memory)
    ("anti-Xyz", "prophylaxis", True),    # not known to the profile either way: identify it
])
def test_other_antibodies_by_the_profile_lists(name, pathway, task):
    plan = make_plan(_booked_positive(antibodies=["other"], antibody_other=name), now=utc(2026, 5, 3))
    assert plan.pathway == pathway
    assert any(i.code.startswith("antibody-identification") for i in plan.items) is task
    if name == "anti-Lea":
        assert "antibody-not-significant" in alert_codes(plan)


def test_antibody_names_and_significance():
    p = load_profile("bsh-2014")
    assert antibody_name("Jk(a)") == antibody_name("anti Jka") == antibody_name("anti-Jka") == "anti-Jka"
    assert antibody_name("  ") is None
    assert significance("anti-c", p) == significance("anti-K", p) == "significant"
    assert significance("anti-lea", p) == "not-significant"        # case only where unambiguous
    assert significance("anti-xyz", p) == significance(None, p) == "unknown"


def test_significant_antibody_without_a_level_asks_for_a_titre_now():
    # BSH 2016 (White et al.), abstract: a detected antibody has its level measured; the first
    # titre is due at once, not at the next 4-week interval
    plan = make_plan(_booked_positive(antibodies=["anti-c"]), now=utc(2026, 5, 2))
    it = item(plan, "surveillance-titre")
    assert it.due == utc(2026, 5, 1, 9) and it.state == "due"
    assert "no titre or quantitation yet for anti-c" in it.reason


def test_anti_d_after_prophylaxis_without_a_level_asks_for_quantitation():
    # BSH 2016 (White et al.), abstract: passive and immune anti-D are confused without a level
    e = booked_negative() + [dose("2026-09-13T09:00:00Z", 1500),
                             _positive("2026-10-01T09:00:00Z", antibodies=["anti-D"], id="s-d")]
    plan = make_plan(e, now=utc(2026, 10, 2), profile="bsh-2014-single")
    it = item(plan, "anti-d-quantitation")
    assert it.code == "anti-d-quantitation:s-d" and it.state == "due"
    assert item(plan, "routine-dose-1").state == "done" and plan.pathway == "prophylaxis"
    later = _positive("2026-10-04T09:00:00Z", antibodies=["anti-D"], anti_d_iu_ml=0.1, anti_d_origin="passive",
                      id="s-q")
    it = item(make_plan(e + [later], now=utc(2026, 10, 5), profile="bsh-2014-single"), "anti-d-quantitation")
    assert (it.state, it.done_record_id) == ("done", "s-q")


def test_an_immune_anti_d_answers_the_quantitation_and_stops_prophylaxis():
    e = booked_negative() + [dose("2026-09-13T09:00:00Z", 1500),
                             _positive("2026-10-01T09:00:00Z", antibodies=["anti-D"]),
                             _positive("2026-10-03T09:00:00Z", antibodies=["anti-D"], anti_d_iu_ml=6.0,
                                       anti_d_origin="immune")]
    plan = make_plan(e, now=utc(2026, 10, 4), profile="bsh-2014-single")
    assert item(plan, "anti-d-quantitation").state == "done"
    assert plan.pathway == "surveillance"


def test_the_card_lists_the_identification_as_an_open_action():
    from clinic.card.view import build_view
    from tests.care.builders import pregnancy, woman

    entries = _booked_positive()
    plan = make_plan(entries, now=utc(2026, 5, 3)).to_dict()
    view = build_view(woman(), pregnancy(), entries, plan=plan, issuer={"name": "Test Clinic"}, issue=1,
                      issued_at="2026-05-03T10:00:00Z", now=utc(2026, 5, 3))
    (act,) = [a for a in view["actions"] if a["title"] == "Identify the antibody on the positive screen"]
    assert act["state"] == "due" and act["closes"] == "8 May 2026"
    assert view["sensitised"] is True


def test_the_task_follows_the_time_of_the_screen_not_of_now():
    # the order of entries and the moment of planning never move the due date
    a = item(make_plan(_booked_positive(), now=utc(2026, 5, 3)), "antibody-identification")
    b = item(make_plan(_booked_positive(), now=utc(2026, 5, 3) + timedelta(days=30)), "antibody-identification")
    assert a.due == b.due == utc(2026, 5, 1, 9)
