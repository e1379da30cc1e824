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
