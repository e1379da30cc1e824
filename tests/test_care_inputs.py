"""One builder makes the care engine's inputs from settings; every caller plans the same way."""
from __future__ import annotations

from datetime import datetime, timezone
from zoneinfo import ZoneInfo

import pytest

from clinic.care import CareContext, ProfileError, load_profile, plan_pregnancy
from clinic.care_inputs import _frozen, build_inputs, care_inputs, plan_from_settings
from clinic.config import parse_settings
from tests.care.builders import booked_negative, pregnancy, woman

NOW = datetime(2026, 9, 20, 9, 0, tzinfo=timezone.utc)


def settings(**care):
    return parse_settings({
        "facility": {"id": "demo-clinic", "timezone": "Africa/Nairobi"},
        "care": {"profile": "bsh-2014", "rhd_negative_frequency": 0.2, "maternal_blood_volume_ml": 4500, **care},
        "stock": {"products": [{"name": "Anti-D 1500 IU", "vial_iu": 1500, "routes": ["IM", "IV"]}]},
    })


def test_care_inputs_carry_profile_overrides_and_facility_facts():
    s = settings(overrides={"routine.regimen": "single"})
    profile, ctx = care_inputs(s)
    assert (profile.id, profile.regimen, profile.version.endswith("+local")) == ("bsh-2014", "single", True)
    assert ctx == CareContext(0.2, 4500.0, s.products, ZoneInfo("Africa/Nairobi"))


def test_plan_from_settings_is_the_engine_with_those_inputs():
    s = settings()
    history = (woman(), pregnancy(), booked_negative())
    direct = plan_pregnancy(*history, now=NOW, profile=load_profile("bsh-2014"),
                            context=CareContext(0.2, 4500.0, s.products, ZoneInfo("Africa/Nairobi")))
    assert plan_from_settings(s, history, NOW).to_dict() == direct.to_dict()


def test_same_inputs_are_built_once_and_different_ones_apart():
    a, b = care_inputs(settings()), care_inputs(settings())
    assert a[0] is b[0] and a[1] is b[1]
    # An override's type is part of the key: 1, 1.0 and True are different values of a profile.
    assert len({_frozen(1), _frozen(1.0), _frozen(True)}) == 3
    assert _frozen({"b": [1, 2], "a": "x"}) == _frozen({"a": "x", "b": (1, 2)})
    one = build_inputs("bsh-2014", {"events.bands.0.dose_iu": 500}, timezone="UTC")
    other = build_inputs("bsh-2014", {"events.bands.0.dose_iu": 250}, timezone="UTC")
    assert one[0] is not other[0] and one[0].get("events.bands.0.dose_iu") == 500
    assert build_inputs("bsh-2014", {}, timezone="Africa/Nairobi")[1].tz == ZoneInfo("Africa/Nairobi")


def test_an_unknown_profile_is_refused_by_name():
    with pytest.raises(ProfileError, match="who-1999"):
        build_inputs("who-1999", {}, timezone="UTC")
