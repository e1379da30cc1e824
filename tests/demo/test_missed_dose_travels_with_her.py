"""A missed dose travels with the woman (story a-earlier-missed): two years ago her RhD-positive
baby's postpartum anti-D was not given; booked again, the plan raises an alert at booking and
her card says so (earlier pregnancies are read from the store).

Source: the follow-up antibody screen after a missed dose, and its timing, are common practice
(profile section missed_dose); an antibody screen at booking in every pregnancy: BSH 2016
(White et al., Transfus Med 26:246-263), abstract."""
from __future__ import annotations

import shutil

from seed_demo.check import plan_story
from seed_demo.scenario import earlier_pregnancy_id, pregnancy_id
from seed_demo.stories import story

STORY = story("a-earlier-missed")


def test_the_earlier_pregnancy_is_in_the_store_with_its_dose_missed(demo_dirs, demo_stores, demo_now):
    from clinic.care_inputs import plan_from_settings
    from clinic.config import load_settings

    store = demo_stores["clinic-a"]
    earlier = store.get(earlier_pregnancy_id(STORY.key))
    assert earlier["woman_id"] == store.get(pregnancy_id(STORY.key))["woman_id"]
    assert earlier["status"] == "delivered"
    plan = plan_from_settings(load_settings(demo_dirs["clinic-a"]), store.history(earlier["id"]), demo_now)
    assert [m.code for m in plan.missed_doses] == ["postpartum-dose"]


def test_booking_again_raises_the_alert(demo_dirs, demo_stores, demo_now):
    plan = plan_story(demo_dirs["clinic-a"], STORY, demo_now, store=demo_stores["clinic-a"])
    (a,) = plan.alerts_with("earlier-dose-missed")
    assert a.severity == "warning"          # no antibody screen yet in this pregnancy
    assert "anti-D after birth" in a.message and earlier_pregnancy_id(STORY.key) in a.record_ids
    assert [e.pregnancy_id for e in plan.earlier] == [earlier_pregnancy_id(STORY.key)]


def test_her_card_says_it(demo_dirs, demo_now, tmp_path):
    from clinic.card.issue import issue_card
    from clinic.config import load_settings
    from clinic.store import Store

    d = tmp_path / "clinic-a"
    shutil.copytree(demo_dirs["clinic-a"], d)
    card = issue_card(d, Store(d), load_settings(d), pregnancy_id(STORY.key), now=demo_now)
    (e,) = card.view["earlier"]
    assert e["which"].startswith("Earlier pregnancy (booked ")
    assert "anti-D missed: anti-D after birth" in e["lines"][0] and "screen at this booking" in e["lines"][0]
