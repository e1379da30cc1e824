"""Gestational age of an entry must lie between 4+0 and 44+0 weeks.

The limits are plausibility bounds (common practice): before 4+0 a pregnancy is not yet
detectable, and 44+0 is well past the end of term (42+0, WHO definition of post-term, from memory).
"""
from __future__ import annotations

import pytest

from clinic.records.validate import ValidationError, validate_record
from tests.records.helpers import NOW, TZ, valid


@pytest.mark.parametrize("ga", ["3+6", "44+1", "2", 27, 400])
def test_ga_outside_4_to_44_weeks_is_refused(ga):
    with pytest.raises(ValidationError) as e:
        validate_record("screen", valid("screen", ga_days=ga), now=NOW, tz=TZ)
    assert "ga_days" in e.value.errors
    assert "4+0 to 44+0" in e.value.errors["ga_days"]


@pytest.mark.parametrize("ga, days", [("4+0", 28), ("44+0", 308), ("30+2", 212), ("30w2d", 212), (212, 212)])
def test_ga_inside_the_range_is_stored_as_days(ga, days):
    # weeks x 7 + days: 30+2 = 212 days (arithmetic)
    assert validate_record("screen", valid("screen", ga_days=ga), now=NOW, tz=TZ)["ga_days"] == days


def test_ga_days_part_above_6_is_refused():
    with pytest.raises(ValidationError) as e:
        validate_record("screen", valid("screen", ga_days="30+7"), now=NOW, tz=TZ)
    assert "ga_days" in e.value.errors
