"""An event kind recorded at an unusual gestational age raises a warning for a clinician to check
the kind or the date; the anti-D dose is still planned (never withheld on a plausibility check).
Ranges are in clinic/care/event_ga.toml, marked common practice there."""
import pytest

from tests.care.builders import alert_codes, booked_negative, event, item, make_plan, utc

# Standard builder pregnancy: LMP 2026-03-01, so 2026-09-13 is 28+0 and 2026-05-03 is 9+0.


@pytest.mark.parametrize("kind,when,unusual", [
    ("ectopic", "2026-09-13T09:00:00Z", True),        # ectopic at 28+0: not an ectopic, or a wrong date
    ("ectopic", "2026-05-03T09:00:00Z", False),       # ectopic at 9+0: the usual time
    ("amniocentesis", "2026-05-03T09:00:00Z", True),  # amniocentesis at 9+0: before 15 weeks
    ("antepartum-haemorrhage", "2026-09-13T09:00:00Z", False),  # no range: bleeding happens at any GA
])
def test_event_at_an_unusual_ga_is_flagged_and_still_dosed(kind, when, unusual):
    e = booked_negative() + [event(when, event_kind=kind)]
    plan = make_plan(e, now=utc(2026, 9, 13, 12) if when.startswith("2026-09") else utc(2026, 5, 3, 12))
    assert ("event-ga-unusual" in alert_codes(plan)) is unusual
    item(plan, "event-dose")   # the event keeps its dose item: the check never removes it


def test_unusual_ga_does_not_change_the_dose():
    # Ectopic recorded at 28+0 under bsh-2014: the dose is the profile's from 20 weeks, 500 IU
    # (BSH 2014, Qureshi et al., Transfusion Medicine 24:8-20), due now, with the warning beside it.
    plan = make_plan(booked_negative() + [event("2026-09-13T09:00:00Z", event_kind="ectopic")],
                     now=utc(2026, 9, 13, 12))
    it = item(plan, "event-dose")
    assert (it.state, it.dose_iu) == ("due", 500)
    assert "event-ga-unusual" in alert_codes(plan)
