"""Whenever the demo is built, each facility has care due today (and some overdue)."""
from __future__ import annotations

import pytest

from seed_demo.check import plan_story
from seed_demo.scenario import FACILITY_SITES
from seed_demo.stories import stories_at


@pytest.mark.parametrize("site", FACILITY_SITES)
def test_each_facility_has_an_item_due_now(site, demo_dirs, demo_stores, demo_now):
    due = []
    for s in stories_at(site):
        plan = plan_story(demo_dirs[site], s, demo_now, store=demo_stores[site])
        due += [(s.key, it.code) for it in plan.items
                if it.state == "due" and (it.opens or it.due) is not None and (it.opens or it.due) <= demo_now]
    assert due, f"nothing due today at {site}"


def test_clinics_have_overdue_work_for_the_follow_up_list(demo_dirs, demo_stores, demo_now):
    overdue = set()
    for site in ("clinic-a", "clinic-b", "clinic-c"):
        for s in stories_at(site):
            plan = plan_story(demo_dirs[site], s, demo_now, store=demo_stores[site])
            if any(it.state == "overdue" for it in plan.items):
                overdue.add(site)
    assert overdue == {"clinic-a", "clinic-b", "clinic-c"}
