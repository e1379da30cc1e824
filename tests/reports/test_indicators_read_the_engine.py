"""The coverage indicators "partner typed", "fetal RHD tested" and "new immune sensitisations"
read the care engine's plan (items partner-typing and fetal-rhd-test, alert immune-anti-d),
not the records or the profile flags. Hand-worked on three invented pregnancies booked on
2026-05-01 (the care builders' standard pregnancy: LMP 2026-03-01), report month May 2026, UTC."""
from datetime import datetime, timezone

from clinic.reports.coverage import Case, compute_month
from clinic.reports.month import Month
from tests.care.builders import booked_negative, make_plan, pregnancy, rec, screen, woman

NOW = datetime(2026, 6, 1, tzinfo=timezone.utc)
MAY = Month.parse("2026-05")
F = "clinic-t"


def _case(pid, entries, profile="bsh-2014", **preg_fields):
    preg = dict(pregnancy(**preg_fields), id=pid)
    return Case(woman(), preg, entries, make_plan(entries, now=NOW, profile=profile, preg=preg), facility=F)


def _report():
    # S: anti-D titre 1:8 on 2026-05-20 with no anti-D ever given and no laboratory judgement
    #    recorded: the engine judges it immune (nothing given in the 84 days before: common
    #    practice). The records alone (anti_d_origin) would not have counted her.
    s = screen("2026-05-20T09:00:00Z", "positive", antibodies=["anti-D"], titre=8, titre_antibody="anti-D")
    sens = _case("p-sens", booked_negative() + [s])
    # T: partner typed and fetal RHD tested (bsh-2014 targets prophylaxis: NICE DG25 1.1)
    typed = _case("p-typed", booked_negative() + [
        rec("partner_typing", rhd="positive", tested_on="2026-05-02"),
        rec("fetal_rhd", result="positive", sampled_on="2026-05-25")])
    # A: acog-2017 does not target prophylaxis: no fetal-rhd-test planned, so not in that denominator
    acog = _case("p-acog", booked_negative(), profile="acog-2017")
    # E: ended early (status ended-early): the engine marks partner typing and the fetal test not
    #    needed, so she is in neither denominator (counting records, she would have been a
    #    "partner not typed")
    ended = _case("p-ended", booked_negative(), status="ended-early")
    return compute_month([sens, typed, acog, ended], MAY, timezone.utc, now=NOW, facilities=[F]), s


def test_partner_typed_reads_the_partner_typing_item():
    rep, _ = _report()
    c = rep.cell(F, "neg_partner_typed")
    # p-typed of p-sens, p-typed and p-acog (p-ended: not needed)
    assert (c.numerator, c.denominator) == (1, 3)


def test_fetal_rhd_tested_counts_only_where_the_engine_plans_the_test():
    rep, _ = _report()
    c = rep.cell(F, "neg_fetal_rhd")
    assert (c.numerator, c.denominator) == (1, 2)   # p-typed of p-sens and p-typed (bsh-2014; p-ended not needed)


def test_new_immune_sensitisation_reads_the_engines_immune_anti_d_alert():
    rep, s = _report()
    assert rep.cell(F, "new_sensitisations").numerator == 1
    (fu,) = rep.sensitisations
    assert (fu.pregnancy_id, fu.record_id, fu.detail["titre"]) == ("p-sens", s["id"], 8)


def test_a_task_closed_as_no_longer_needed_stays_planned_but_is_not_missed():
    # issue 11 rule 3: the father was never typed and the single routine dose was given on 28+0
    # (NICE TA156 3.3), so partner typing is "no longer needed" (its choice is gone). It was
    # planned: "partner typed" still counts her as not typed (1 of 2), with no follow-up; the
    # fetal RHD test likewise.
    now = datetime(2026, 9, 20, tzinfo=timezone.utc)
    entries = booked_negative() + [screen("2026-09-13T08:00:00Z"),
                                   rec("dose", given_at="2026-09-13T09:00:00Z", amount=1500, unit="IU", route="IM",
                                       lot="L1", lot_expiry="2027-12-31", indication="routine-antenatal",
                                       given_by="Midwife B")]
    preg = dict(pregnancy(), id="p-lapsed")
    plan = make_plan(entries, now=now, profile="bsh-2014-single", preg=preg)
    assert plan.item("partner-typing").state == "not-needed"
    assert plan.item("partner-typing").reason.startswith("no longer needed")
    lapsed_case = Case(woman(), preg, entries, plan, facility=F)
    typed_entries = booked_negative() + [rec("partner_typing", rhd="positive", tested_on="2026-05-02")]
    typed_preg = dict(pregnancy(), id="p-typed2")
    typed = Case(woman(), typed_preg, typed_entries,
                 make_plan(typed_entries, now=now, profile="bsh-2014-single", preg=typed_preg), facility=F)
    rep = compute_month([lapsed_case, typed], MAY, timezone.utc, now=now, facilities=[F])
    c = rep.cell(F, "neg_partner_typed")
    assert (c.numerator, c.denominator) == (1, 2)
    assert c.outcomes["partner-not-typed"] == 1 and "missed" not in c.outcomes
    assert rep.cell(F, "neg_fetal_rhd").denominator == 2
    assert not [f for f in rep.follow_up if f.pregnancy_id == "p-lapsed" and f.item_code == "partner-typing"]
