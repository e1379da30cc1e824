"""A task that only serves a decision ends when the decision is gone (issue 11 rule 3).

The profile's [decisions] table (data, each line with its source) says which items' choice each
plan item informs and whether that is all it is for. The father's RhD type only lets her decline
routine antenatal anti-D (NICE TA41 (2002) 1.2, unchanged by TA156 (2008)); the cell-free fetal
RHD test only guides antenatal anti-D (NICE DG25 (2016) 1.1) and, for a sensitised woman,
whether the baby is at risk (BSH 2016, White et al., abstract). Once each item it serves is
given, not needed or past its window, such a task closes as "no longer needed", never overdue
or missed afterwards.

Standard pregnancy (builders): LMP 2026-03-01, 28+0 is 2026-09-13, 34+0 2026-10-25; UTC.
"""
import pytest

from clinic.care import ProfileError, load_profile
from clinic.care.codes import ITEMS, NO_LONGER_NEEDED, lapsed
from tests.care.builders import booked_negative, dose, item, make_plan, screen, utc

SCREEN_28 = screen("2026-09-13T08:00:00Z")


def _given(*dates, iu=500):
    return [dose(f"{d}T09:00:00Z", iu) for d in dates]


def test_partner_typing_is_no_longer_needed_once_the_single_routine_dose_is_given():
    # bsh-2014-single: one routine dose (NICE TA156 3.3). Before it, the untyped father is
    # overdue (the choice is still to be made); once it is given, no choice is left.
    before = make_plan(booked_negative() + [SCREEN_28], now=utc(2026, 9, 14), profile="bsh-2014-single")
    assert item(before, "partner-typing").state == "overdue"
    plan = make_plan(booked_negative() + [SCREEN_28] + _given("2026-09-13", iu=1500), now=utc(2026, 9, 20),
                     profile="bsh-2014-single")
    it = item(plan, "partner-typing")
    assert it.state == "not-needed" and it.timeliness is None
    assert it.reason.startswith(f"{NO_LONGER_NEEDED}: it informs whether she may decline routine antenatal anti-D")
    assert "routine antenatal anti-D 1 of 1 given" in it.reason
    assert lapsed(it.state, it.reason)


def test_with_two_routine_doses_the_choice_stays_until_the_second_is_closed():
    one = make_plan(booked_negative() + [SCREEN_28] + _given("2026-09-13"), now=utc(2026, 9, 20))
    assert item(one, "partner-typing").state == "overdue"
    both = make_plan(booked_negative() + [SCREEN_28] + _given("2026-09-13", "2026-10-25"), now=utc(2026, 10, 26))
    assert item(both, "partner-typing").state == "not-needed"
    # a dose past its window counts as a closed choice too (missed, then no longer needed)
    # (dose 2 is worth giving late until the end of 37+6, 2026-11-21: common practice)
    gone = make_plan(booked_negative() + [SCREEN_28] + _given("2026-09-13"), now=utc(2026, 11, 23))
    assert item(gone, "routine-dose-2").state == "missed"
    assert item(gone, "partner-typing").state == "not-needed"


def test_fetal_rhd_test_missed_then_no_longer_needed_once_routine_anti_d_is_decided():
    # bsh-2014 targets prophylaxis (NICE DG25): the test is missed after 33+6 while routine dose 2
    # is still to give; once dose 2 is given the choice is made and the test is no longer needed
    mid = make_plan(booked_negative() + [SCREEN_28] + _given("2026-09-13"), now=utc(2026, 10, 26))
    assert item(mid, "fetal-rhd-test").state == "missed"
    done = make_plan(booked_negative() + [SCREEN_28] + _given("2026-09-13", "2026-10-25"), now=utc(2026, 10, 26))
    it = item(done, "fetal-rhd-test")
    assert it.state == "not-needed" and it.reason.startswith(NO_LONGER_NEEDED)


def test_a_sensitised_woman_keeps_the_tests_that_guide_her_surveillance():
    # immune anti-D: routine doses not needed; the fetal RHD test now tells whether the baby is
    # at risk (BSH 2016, White et al., abstract: cell-free fetal DNA in alloimmunised pregnancies)
    s = screen("2026-06-01T09:00:00Z", "positive", antibodies=["anti-D"], titre=8, titre_antibody="anti-D",
               anti_d_origin="immune")
    plan = make_plan(booked_negative() + [s], now=utc(2026, 6, 2))
    assert item(plan, "routine-dose-1").state == "not-needed"
    assert item(plan, "fetal-rhd-test").state == "due"
    assert item(plan, "partner-typing").state == "due"


def test_a_facility_can_say_a_task_stands_on_its_own():
    # overriding the table (data, not code): partner typing then stays overdue after the dose
    plan = make_plan(booked_negative() + [SCREEN_28] + _given("2026-09-13", iu=1500), now=utc(2026, 9, 20),
                     profile="bsh-2014-single", overrides={"decisions.partner-typing.only": False})
    assert item(plan, "partner-typing").state == "overdue"


@pytest.mark.parametrize("pid", ["bsh-2014", "bsh-2014-single", "acog-2017", "acog-2017-early-2024"])
def test_every_plan_item_is_in_the_decisions_table(pid):
    table = load_profile(pid).get("decisions")
    assert set(table) - {"source"} == set(ITEMS)
    for base, entry in table.items():
        if base != "source":
            assert set(entry["serves"]) <= set(ITEMS) and entry["decision"].strip()
            assert not entry["only"] or entry["serves"], base
    assert table["partner-typing"]["only"] and table["fetal-rhd-test"]["only"]


def test_a_table_naming_an_unknown_item_or_only_without_serves_is_refused():
    with pytest.raises(ProfileError, match="decisions.partner-typing.serves"):
        load_profile("bsh-2014", overrides={"decisions.partner-typing.serves": ["no-such-item"]})
    with pytest.raises(ProfileError, match="only = true needs"):
        load_profile("bsh-2014", overrides={"decisions.booking-typing.only": True})
