"""An FMH dose is a total, not an extra (issue 11 rule 2).

The vial rule (AABB Technical Manual, from memory; ACOG PB 181 (2017), from memory; Sandler &
Gottschall, Obstet Gynecol 2012;120:1428-1438, abstract (read): one 300 µg vial per 30 mL of
fetal whole blood, with an extra vial) gives the TOTAL anti-D for the bleed, the standard
postpartum or event dose included. So does the BSH rule (Qureshi et al., BSH 2014, Transfus Med
2014;24:8-20: 500 IU covers 4 mL fetal red cells, 125 IU per further mL IM; the 125: from
memory). The plan asks for that total less what was given for the bleed and less the standard
dose it still plans: never the total on top of the standard dose.
"""
from datetime import timedelta

from clinic.care import CareContext, Product
from tests.care.builders import alert_codes, birth, booked_negative, dose, event, item, make_plan, rec, utc

BORN = utc(2026, 11, 28, 10)
P1500 = Product("Anti-D 1500 IU (300 µg)", 1500, ("IM", "IV"))


def _kb(percent, covers, at):
    return rec("fmh", method="kleihauer-betke", sampled_at=f"{at:%Y-%m-%dT%H:%M:%SZ}", fetal_cell_percent=percent,
               covers_id=covers)


def _birth_plan(percent, *given, profile="acog-2017", hours_after=6):
    b = birth(f"{BORN:%Y-%m-%dT%H:%M:%SZ}", id="b1")
    doses = [dose(f"{BORN + timedelta(hours=h):%Y-%m-%dT%H:%M:%SZ}", iu, indication="postpartum", covers_id="b1")
             for h, iu in given]
    return make_plan(booked_negative() + [b, _kb(percent, "b1", BORN + timedelta(hours=1))] + doses,
                     now=BORN + timedelta(hours=hours_after), profile=profile, products=(P1500,))


def _open_ask(plan, *codes):
    return sum(i.dose_iu or 0 for i in plan.items if i.code in codes and i.state in ("not-yet-due", "due", "overdue"))


def test_acog_kb_0_3_percent_postpartum_asks_one_vial_beyond_the_standard_one():
    # Kleihauer-Betke 0.3 % x 5000 mL maternal blood = 15 mL fetal whole blood;
    # 15 mL / 30 mL per 300 µg vial = 0.5; round (.5 up) = 1; add one = 2 vials = 600 µg = 3000 IU
    # in all for this bleed (AABB / ACOG PB 181, from memory). The standard postpartum 300 µg
    # (1500 IU) is one of them: the further item asks 3000 - 1500 = 1500 IU, not 3000.
    plan = _birth_plan(0.3)
    assert item(plan, "postpartum-dose").dose_iu == 1500 and item(plan, "postpartum-dose").state == "due"
    extra = item(plan, "postpartum-fmh-dose")
    assert (extra.state, extra.dose_iu) == ("due", 1500)
    assert "3000 IU needed in all" in extra.reason and "standard 1500 IU still to give" in extra.reason
    assert _open_ask(plan, "postpartum-dose", "postpartum-fmh-dose") == 3000
    assert "fmh-large" in alert_codes(plan)


def test_acog_after_the_standard_vial_one_more_is_asked_and_after_both_nothing():
    # the same bleed (3000 IU in all): 1500 IU given -> 1500 more; 3000 given -> done
    plan = _birth_plan(0.3, (3, 1500))
    assert item(plan, "postpartum-dose").state == "done"
    assert item(plan, "postpartum-fmh-dose").dose_iu == 1500
    both = _birth_plan(0.3, (3, 1500), (4, 1500))
    assert item(both, "postpartum-fmh-dose").state == "done"
    assert _open_ask(both, "postpartum-dose", "postpartum-fmh-dose") == 0
    # the whole total given at once is what the FMH result asks for: no "dose above allowed"
    once = _birth_plan(0.3, (3, 3000))
    assert item(once, "postpartum-fmh-dose").state == "done"
    assert "dose-above-allowed" not in alert_codes(once)


def test_acog_kb_1_percent_is_three_vials_in_all():
    # 1 % x 5000 mL = 50 mL; 50 / 30 = 1.67; round = 2; add one = 3 vials = 4500 IU in all;
    # with the standard 1500 IU still planned: 3000 IU more
    plan = _birth_plan(1.0)
    assert item(plan, "postpartum-fmh-dose").dose_iu == 3000
    assert _open_ask(plan, "postpartum-dose", "postpartum-fmh-dose") == 4500


def test_bsh_standard_500_plus_fmh_guided_top_up():
    # BSH 2014: 1 % x 5000 mL = 50 mL whole blood = 25 mL red cells (fetal Hct 0.5, common
    # practice) x 125 IU/mL IM (from memory) = 3125 IU in all, the standard 500 IU included
    # (500 IU covers 4 mL red cells): planned 500 + 2625, never 500 + 3125
    plan = _birth_plan(1.0, profile="bsh-2014")
    assert item(plan, "postpartum-dose").dose_iu == 500
    assert item(plan, "postpartum-fmh-dose").dose_iu == 2625
    assert _open_ask(plan, "postpartum-dose", "postpartum-fmh-dose") == 3125


def test_bsh_small_bleed_is_covered_by_the_standard_dose():
    # 0.1 % x 5000 = 5 mL whole blood = 2.5 mL red cells, within the 4 mL that 500 IU covers
    plan = _birth_plan(0.1, profile="bsh-2014")
    assert plan.item("postpartum-fmh-dose") is None


def test_event_bleed_total_with_the_event_dose_still_to_give():
    # abdominal trauma at 30 weeks (BSH 2014: 500 IU from 20 weeks, FMH test required);
    # KB 0.8 % x 5000 = 40 mL whole blood = 20 mL red cells x 125 = 2500 IU in all: 500 + 2000
    t = utc(2026, 9, 27, 10)
    e = event(f"{t:%Y-%m-%dT%H:%M:%SZ}", "abdominal-trauma", id="ev1")
    plan = make_plan(booked_negative() + [e, _kb(0.8, "ev1", t + timedelta(hours=1))], now=t + timedelta(hours=3))
    assert item(plan, "event-dose:ev1").dose_iu == 500
    assert item(plan, "event-fmh-dose:ev1").dose_iu == 2000
    assert _open_ask(plan, "event-dose:ev1", "event-fmh-dose:ev1") == 2500


def test_repeat_doses_for_continuing_bleeding_are_not_counted_against_the_bleed():
    # continuing bleeding (BSH 2014, from memory: at least 500 IU every 6 weeks): a dose weeks
    # after the late window is a repeat dose, not part of this bleed's total
    t = utc(2026, 8, 1, 10)
    e = event(f"{t:%Y-%m-%dT%H:%M:%SZ}", "antepartum-haemorrhage", id="ev1", ongoing=True)
    kb = _kb(0.8, "ev1", t + timedelta(hours=1))
    first = dose(f"{t + timedelta(hours=2):%Y-%m-%dT%H:%M:%SZ}", 500, indication="sensitising-event",
                 covers_id="ev1")
    repeat = dose(f"{t + timedelta(days=42):%Y-%m-%dT%H:%M:%SZ}", 500, indication="sensitising-event",
                  covers_id="ev1")
    plan = make_plan(booked_negative() + [e, kb, first, repeat], now=t + timedelta(days=5))
    assert item(plan, "event-fmh-dose:ev1").dose_iu == 2000   # 2500 in all - 500 given for the bleed
    later = make_plan(booked_negative() + [e, kb, first, repeat], now=t + timedelta(days=43))
    assert "2500 IU needed in all" in item(later, "event-fmh-dose:ev1").reason
    assert "500 IU given so far" in item(later, "event-fmh-dose:ev1").reason


def test_context_blood_volume_changes_the_total_not_the_rule():
    # 0.3 % x 4000 mL = 12 mL; 12 / 30 = 0.4; round = 0; add one = 1 vial: the standard dose covers it
    from clinic.care import load_profile, plan_pregnancy
    from tests.care.builders import pregnancy, woman

    b = birth(f"{BORN:%Y-%m-%dT%H:%M:%SZ}", id="b1")
    ctx = CareContext(maternal_blood_volume_ml=4000.0, products=(P1500,))
    plan = plan_pregnancy(woman(), pregnancy(), booked_negative() + [b, _kb(0.3, "b1", BORN + timedelta(hours=1))],
                          now=BORN + timedelta(hours=5), profile=load_profile("acog-2017"), context=ctx)
    assert plan.item("postpartum-fmh-dose") is None
