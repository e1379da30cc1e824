"""Today at a glance (clinic/web/triage.py, templates/today.html): what cannot wait first (overdue
items and running 72-hour countdowns), the rest in folded groups by urgency and kind with a count
on each, one line per item (her name, what is due, by when), the detail one tap away, and filters
with their counts."""
from __future__ import annotations

import re
from datetime import datetime, timedelta, timezone

import pytest

from clinic.web import triage
from tests.web.conftest import at_ago

NOW = datetime(2026, 12, 2, 12, 0, tzinfo=timezone.utc)


def _item(state, category="routine", code="routine-dose-1", title="Routine anti-D 1 of 2 (1500 IU at 28 weeks)",
          closes=None, late_until=None, opens=None, dose_iu=1500):
    return {"state": state, "category": category, "code": code, "title": title, "dose_iu": dose_iu,
            "closes": closes, "late_until": late_until, "opens": opens, "due": None}


def _row(item, name="Test Woman"):
    return {"item": item, "woman": {"name": name}, "pregnancy": {"id": "p-" + name}}


def test_overdue_and_deadlines_within_72_hours_cannot_wait():
    h = timedelta(hours=1)
    assert triage.tier_of(_item("overdue", closes=NOW - 2 * h, late_until=NOW + 100 * h), NOW) == "now"
    assert triage.tier_of(_item("due", category="event", closes=NOW + 71 * h), NOW) == "now"
    assert triage.tier_of(_item("due", category="event", closes=NOW + 72 * h), NOW) == "now"
    assert triage.tier_of(_item("due", closes=NOW + 73 * h), NOW) == "due"
    assert triage.tier_of(_item("due"), NOW) == "due"  # no hard deadline
    assert triage.tier_of(_item("not-yet-due", opens=NOW + 24 * h, closes=NOW + 60 * h), NOW) == "soon"


def test_kinds_follow_the_category_and_an_unknown_one_is_refused():
    assert triage.kind_of(_item("due", category="postpartum")) == "anti-d"
    assert triage.kind_of(_item("due", category="event", code="event-fmh:x", dose_iu=None)) == "anti-d"
    assert triage.kind_of(_item("due", category="screen")) == "tests"
    assert triage.kind_of(_item("due", category="birth")) == "tests"
    assert triage.kind_of(_item("due", category="surveillance")) == "surveillance"
    with pytest.raises(ValueError, match="'gardening' is not one of"):
        triage.kind_of(_item("due", category="gardening"))


def test_cannot_wait_comes_in_order_of_the_time_left_to_act_and_only_its_anti_d_is_open():
    h = timedelta(hours=1)
    late = _row(_item("overdue", category="postpartum", code="postpartum-dose", closes=NOW - 48 * h,
                      late_until=NOW + 120 * h), "Late Lena")
    countdown = _row(_item("due", category="event", code="event-dose:e1", closes=NOW + 30 * h), "Countdown Cora")
    late_typing = _row(_item("overdue", category="typing", code="partner-typing", closes=NOW - 10 * h,
                             late_until=NOW + 500 * h, dose_iu=None), "Typing Tia")
    due = _row(_item("due", closes=NOW + 400 * h), "Due Dina")
    soon = _row(_item("not-yet-due", category="screen", code="pre-dose-screen", opens=NOW + 48 * h,
                      closes=NOW + 900 * h, dose_iu=None), "Soon Sara")
    # The worklist's order: overdue first.
    tiers = triage.triage([late, late_typing, countdown, due, soon], NOW)
    assert [t.key for t in tiers] == ["now", "due", "soon"]
    now = tiers[0]
    assert now.label == "Cannot wait" and now.count == 3
    assert [(g.key, g.count, g.open) for g in now.groups] == [("now-anti-d", 2, True), ("now-tests", 1, False)]
    # 30 hours left on the event's dose beat 120 hours left in the late window of the birth's.
    assert [r["woman"]["name"] for r in now.groups[0].rows] == ["Countdown Cora", "Late Lena"]
    assert all(not g.open for t in tiers[1:] for g in t.groups)
    assert [(t.key, t.count) for t in tiers[1:]] == [("due", 1), ("soon", 1)]


def test_alerts_danger_open_warnings_folded_and_a_short_headline():
    alerts = [{"alert": {"severity": "warning", "message": "typing inconclusive: retest"}},
              {"alert": {"severity": "danger", "message": "postpartum anti-D missed: the baby is RhD positive"}}]
    groups = triage.alert_groups(alerts)
    assert [(g.key, g.count, g.open) for g in groups] == [("alerts-danger", 1, True), ("alerts-warning", 1, False)]
    assert triage.headline(alerts[1]["alert"]["message"]) == "Postpartum anti-D missed"
    assert triage.short_title("Routine antenatal anti-D 1 of 1 (1500 IU once at 28 to 30 weeks)") == \
        "Routine antenatal anti-D 1 of 1"


@pytest.fixture
def event_2h_ago(store, booked):
    return store.create("event", {"event_kind": "abdominal-trauma", "occurred_at": at_ago(hours=2)},
                        by="mwangi", facility="test-clinic", pregnancy_id=booked["pregnancy"]["id"]).record


def _section(html, tier):
    m = re.search(rf'<section class="tier tier-{tier}" id="tier-{tier}">(.*?)</section>', html, re.S)
    return m.group(1) if m else ""


def test_today_page_puts_the_event_countdown_first_as_one_line_with_its_detail(client, booked, event_2h_ago):
    html = client.get("/").get_data(as_text=True)
    now = _section(html, "now")
    assert '<details class="group" id="now-anti-d" open>' in now
    line = re.search(r'<li class="item line state-due cat-event">(.*?)</li>', now, re.S).group(1)
    summary = re.search(r"<summary>(.*?)</summary>", line, re.S).group(1)
    assert "Amina Testcase" in summary and "Anti-D after abdominal trauma" in summary
    assert re.search(r'class="deadline">Give anti-D before \d\d:\d\d \w+ <span class="countdown">\(in 2 d 2\d h\)',
                     summary)
    detail = line.split("</summary>", 1)[1]
    assert "Record this dose" in detail and f'/pregnancies/{booked["pregnancy"]["id"]}"' in detail
    assert "Proposed:" in detail and "Source:" in detail


def test_the_rest_is_folded_with_a_count_on_each_group(client, booked, event_2h_ago):
    html = client.get("/").get_data(as_text=True)
    groups = re.findall(r'<details class="group" id="([\w-]+)"( open)?>\s*<summary>[^<]+<span class="n">(\d+)</span>',
                        html)
    assert groups, "Today shows no groups"
    opened = {g for g, is_open, _ in groups if is_open}
    assert opened <= {"now-anti-d", "alerts-danger"}
    counted = sum(int(n) for g, _, n in groups if not g.startswith("alerts-"))
    assert counted == len(client.get("/api/v1/worklist").get_json()["items"])


def test_each_filter_shows_its_count(client, booked, event_2h_ago):
    html = client.get("/").get_data(as_text=True)
    nav = re.search(r'<nav class="filters".*?</nav>', html, re.S).group(0)
    counts = dict(re.findall(r'href="/(?:\?filter=([\w-]+))?"[^>]*>[^<]+<span class="n">(\d+)</span>', nav))
    api = {flt: len(client.get(f"/api/v1/worklist?filter={flt}").get_json()["items"])
           for flt in ("events", "tests", "postpartum")}
    for flt, n in api.items():
        assert int(counts[flt]) == n, flt
    assert int(counts[""]) == len(client.get("/api/v1/worklist").get_json()["items"])
    assert api["events"] >= 1


def test_a_filtered_today_still_groups_and_says_when_nothing_is_due(client, booked, event_2h_ago):
    html = client.get("/?filter=surveillance").get_data(as_text=True)
    assert "Nothing due, overdue or due in the next 14 days for this filter" in html
    html = client.get("/?filter=events").get_data(as_text=True)
    assert 'id="tier-now"' in html and "Give anti-D before" in html
