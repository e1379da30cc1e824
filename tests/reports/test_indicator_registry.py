"""The indicator registry keeps one fixed order (every output follows it), whatever order the
section modules are imported in, and refuses an indicator registered twice or in no section."""
import pytest

from clinic.reports.coverage import INDICATORS
from clinic.reports.indicators.registry import SECTIONS, indicator

ORDER = ["bookings", "typed_at_booking", "rhd_negative_share", "neg_screen_at_booking", "neg_partner_typed",
         "neg_fetal_rhd", "routine_on_time", "routine_late", "routine_not_given", "routine_both_doses",
         "event_on_time", "event_late", "event_none", "births_neg", "cord_typed", "postpartum_on_time",
         "postpartum_late", "postpartum_missed", "postpartum_fmh", "new_sensitisations", "antid_doses"]


def test_indicators_keep_the_report_order():
    assert [i.id for i in INDICATORS] == ORDER
    ranks = [SECTIONS.index(i.section) for i in INDICATORS]
    assert ranks == sorted(ranks)


def test_a_second_registration_or_an_unknown_section_is_refused():
    with pytest.raises(ValueError, match="registered twice"):
        indicator("bookings", SECTIONS[0], "t", "d", "n", None)
    with pytest.raises(ValueError, match="section"):
        indicator("new_one", "No such section", "t", "d", "n", None)
    assert [i.id for i in INDICATORS] == ORDER
