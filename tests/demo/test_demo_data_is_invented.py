"""The demo's people, phones and lots are plainly invented, and each woman appears once."""
from __future__ import annotations

import re

from seed_demo.scenario import FACILITY_SITES
from seed_demo.sites import SITE_DEFS
from seed_demo.stories import STORIES, table


def test_story_keys_and_names_are_unique():
    assert len({s.key for s in STORIES}) == len(STORIES)
    assert len({s.name for s in STORIES}) == len(STORIES)


def test_phone_numbers_are_in_the_fake_ranges(demo_stores):
    for site in FACILITY_SITES:
        for w in demo_stores[site].iter_records(kind="woman"):
            assert re.fullmatch(r"0700 000 \d{3}", w["phone"]), w["phone"]
    for s in SITE_DEFS.values():
        assert s.phone.startswith("+000 ")


def test_lot_numbers_say_demo(demo_stores):
    for site in FACILITY_SITES:
        for r in demo_stores[site].iter_records():
            if r["kind"] in ("dose", "stock"):
                assert r["lot"].startswith("DEMO-"), r["lot"]


def test_every_story_says_what_it_shows():
    for s in STORIES:
        assert s.shows and s.pathway and s.expect.pathway
    assert len(table().splitlines()) == len(STORIES)
