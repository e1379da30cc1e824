"""EDD by Naegele's rule: the first day of the LMP + 280 days (ACOG Committee Opinion 700,
2017, "Methods for estimating the due date": EDD = LMP + 280 days; from memory)."""
from datetime import date

import pytest

from clinic.care import CareInputError, edd_from_lmp, edd_naegele_calendar, ga_on


@pytest.mark.parametrize("lmp, edd", [
    # LMP + 280 days (ACOG CO 700, 2017; arithmetic on the calendar)
    ("2026-03-01", "2026-12-06"),
    ("2026-01-01", "2026-10-08"),
    # Leap years: 2024 has 29 February, so crossing it shortens the calendar span by one day
    ("2024-01-01", "2024-10-07"),   # 2024-01-01 + 280 days (leap February crossed)
    ("2023-06-01", "2024-03-07"),   # 2023-06-01 + 280 days (29 Feb 2024 inside the span)
    ("2024-02-29", "2024-12-05"),   # an LMP on the leap day itself
])
def test_edd_is_lmp_plus_280_days(lmp, edd):
    assert edd_from_lmp(lmp) == date.fromisoformat(edd)


def test_edd_gives_ga_40_weeks_on_the_edd():
    # GA on the EDD is 40+0 = 280 days by definition (ACOG CO 700, 2017).
    assert ga_on(date(2026, 12, 6), lmp=date(2026, 3, 1)) == 280


@pytest.mark.parametrize("lmp, edd", [
    # Naegele's calendar form: + 1 year - 3 months + 7 days (Naegele's rule as usually taught;
    # common practice — shown beside the 280-day EDD only)
    ("2026-03-01", "2026-12-08"),
    ("2025-05-28", "2026-03-04"),   # 28 May + 7 days = 4 June; - 3 months = 4 March; + 1 year
    ("2025-11-25", "2026-09-02"),   # 25 Nov + 7 days = 2 Dec 2025; - 3 months = 2 Sep 2025; + 1 year
])
def test_naegele_calendar_form(lmp, edd):
    assert edd_naegele_calendar(lmp).isoformat() == edd


def test_bad_lmp_names_the_field():
    with pytest.raises(CareInputError) as e:
        edd_from_lmp("2026-13-01")
    assert "lmp" in e.value.errors
