"""The care engine's vocabulary (clinic/care/codes.py): one place for item codes, their categories,
the record kind that completes each item, and the alert codes; every plan uses only these."""
from hypothesis import given

from clinic.care import codes
from clinic.care.codes import ALERT_CODES, CATEGORIES, COMPLETED_BY, ITEMS, AlertCode, Category, ItemCode
from clinic.records.schema import KINDS
from tests.care.builders import make_plan
from tests.care.test_plan_invariants import SETTINGS, histories


def test_code_helpers_keep_the_stable_strings():
    # Cards, bundles, the API and stored reports carry these strings: they never change.
    assert codes.routine_dose_code(2) == "routine-dose-2"
    assert codes.event_dose_code("e1") == "event-dose:e1"
    assert codes.event_fmh_code("e1") == "event-fmh:e1"
    assert codes.event_fmh_dose_code("e1") == "event-fmh-dose:e1"
    assert codes.event_repeat_code("e1") == "event-repeat:e1"
    assert ItemCode.POSTPARTUM_FMH_DOSE == "postpartum-fmh-dose"
    assert AlertCode.IMMUNE_ANTI_D == "immune-anti-d"


def test_parse_item_code():
    assert codes.parse_item_code("event-dose:e1") == ("event-dose", "e1")
    assert codes.parse_item_code("event-fmh-dose:ab:c") == ("event-fmh-dose", "ab:c")
    assert codes.parse_item_code("routine-dose-2") == ("routine-dose", "2")
    assert codes.parse_item_code("postpartum-fmh-dose") == ("postpartum-fmh-dose", None)
    assert codes.parse_item_code("cord-typing") == ("cord-typing", None)
    assert codes.parse_item_code("something-else-3") == ("something-else-3", None)
    assert codes.item_spec("something-else") is None


def test_every_item_has_a_known_category_and_entry_kind():
    for base, spec in ITEMS.items():
        assert spec.base == base
        assert spec.category in CATEGORIES
        assert spec.ref in ("", "number", "record")
        assert spec.completed_by is None or spec.completed_by in KINDS, base
    assert COMPLETED_BY["event-fmh"] == "fmh"
    assert COMPLETED_BY["cord-typing"] == "birth"
    assert codes.completed_by("routine-dose-1") == "dose"
    assert codes.gives_anti_d("event-fmh-dose:e1") and not codes.gives_anti_d("event-fmh:e1")
    assert codes.category_of("event-repeat:e1") == Category.EVENT


def test_alert_codes_are_unique():
    names = [v for k, v in vars(AlertCode).items() if k.isupper()]
    assert len(names) == len(set(names)) == len(ALERT_CODES)


@SETTINGS
@given(h=histories())
def test_plans_use_only_the_vocabulary(h):
    entries, now, profile, _ = h
    plan = make_plan(entries, now=now, profile=profile)
    for it in plan.items:
        spec = codes.item_spec(it.code)
        assert spec is not None, it.code
        assert it.category == spec.category
        base, ref = codes.parse_item_code(it.code)
        assert (ref is not None) == (spec.ref != ""), it.code
    assert {a.code for a in plan.alerts} <= ALERT_CODES
