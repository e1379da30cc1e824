"""A plan kept by clinic.reports.plan_cache is the plan the engine makes afresh at every later
``now`` the cache lets it stand for; reading ``now`` in any other way than comparing it limits
how long a plan stands; a changed record or profile is a new plan. Invented histories only."""
from __future__ import annotations

import random
from datetime import datetime, timedelta, timezone
from zoneinfo import ZoneInfo

import pytest

from clinic.care import plan_pregnancy
from clinic.care_inputs import build_inputs
from clinic.reports.plan_cache import PlanCache, plan_for_now, rebased, watch
from seed_demo import synthetic
from tests.card.histories import full_history

NOW = datetime(2026, 12, 1, 9, 0, tzinfo=timezone.utc)
NAIROBI = ZoneInfo("Africa/Nairobi")
X = datetime(2026, 12, 5, 12, 0, tzinfo=timezone.utc)


def _histories():
    out = []
    for calls in synthetic.iter_calls(3, 60, 11, NOW, per_month=10, rhd_negative_share=0.8):
        recs = synthetic.stored_records(calls)
        out.append((next(r for r in recs if r["kind"] == "woman"), next(r for r in recs if r["kind"] == "pregnancy"),
                    [r for r in recs if r["kind"] not in ("woman", "pregnancy")]))
    out.append(full_history())
    return out


@pytest.mark.parametrize("profile_id, tz", [("bsh-2014", "Africa/Nairobi"), ("acog-2017", "UTC")])
def test_a_kept_plan_is_the_plan_made_afresh_whenever_it_is_reused(profile_id, tz):
    profile, ctx = build_inputs(profile_id, {}, timezone=tz)
    rng = random.Random(20261201)
    checked = limited = 0
    for w, p, e in _histories():
        for start in (NOW - timedelta(days=230), NOW - timedelta(days=75), NOW - timedelta(days=9), NOW):
            kept = plan_for_now(w, p, e, now=start, profile=profile, context=ctx)
            assert kept.since == start and kept.until > start
            limited += kept.until < start + timedelta(days=3650)
            span = min(kept.until - kept.since, timedelta(days=120))
            for later in [kept.since + span * rng.random() for _ in range(3)] + [kept.since + span - timedelta(
                    microseconds=1)]:
                fresh = plan_pregnancy(w, p, e, now=later, profile=profile, context=ctx)
                assert rebased(kept, later).to_dict() == fresh.to_dict(), (p["id"], start, later, kept.why)
                checked += 1
    assert checked > 600 and limited > 20  # plans of every kind, and many with a turning point


def test_comparisons_with_now_give_the_turning_point():
    t = timedelta(microseconds=1)
    assert watch(NOW, lambda n: n < X)[1] == X
    assert watch(NOW, lambda n: n <= X)[1] == X + t
    assert watch(NOW, lambda n: X > n)[1] == X                # the reflected form
    assert watch(NOW, lambda n: n > X)[1] == X + t            # false now, true once past X
    assert watch(NOW, lambda n: n + timedelta(hours=2) < X)[1] == X - timedelta(hours=2)
    assert watch(NOW, lambda n: n.astimezone(NAIROBI) <= X)[1] == X + t
    assert watch(NOW, lambda n: max(n, X))[1] == X
    assert watch(NOW, lambda n: n > NOW - timedelta(days=1))[2] == "no turning point"
    assert watch(NOW, lambda n: (n + timedelta(minutes=10)) > n)[2] == "no turning point"


def test_reading_now_otherwise_limits_the_plan():
    t = timedelta(microseconds=1)
    nairobi_midnight = datetime(2026, 12, 2, 0, 0, tzinfo=NAIROBI)
    assert watch(NOW, lambda n: n.date())[1] == datetime(2026, 12, 2, tzinfo=timezone.utc)
    assert watch(NOW, lambda n: n.astimezone(NAIROBI).date())[1] == nairobi_midnight
    assert watch(NOW, lambda n: n.astimezone(NAIROBI).day)[1] == nairobi_midnight
    assert watch(NOW, lambda n: n.hour)[1] == NOW + timedelta(hours=1)
    for read in (lambda n: n.strftime("%H:%M"), lambda n: n.isoformat(), lambda n: f"{n}", lambda n: X - n,
                 lambda n: n - X, lambda n: n.timestamp(), lambda n: n.replace(hour=0), lambda n: {n: 1},
                 lambda n: n.minute):
        assert watch(NOW, read)[1] == NOW + t, "read exactly: the plan holds for this instant only"


def test_the_cache_makes_a_new_plan_when_records_profile_or_time_say_so():
    w, p, e = full_history()
    profile, ctx = build_inputs("bsh-2014", {}, timezone="Africa/Nairobi")
    cache = PlanCache()
    first = cache.plan((w, p, e), now=NOW, profile=profile, context=ctx)
    assert cache.plan((w, p, e), now=NOW + timedelta(hours=1), profile=profile, context=ctx).items is first.items
    assert cache.hits == 1
    changed = [dict(e[0], lab="another laboratory")] + e[1:]
    assert cache.plan((w, p, changed), now=NOW, profile=profile, context=ctx).items is not first.items
    other, octx = build_inputs("bsh-2014", {"postpartum.deadline_hours": 48}, timezone="Africa/Nairobi")
    assert cache.plan((w, p, changed), now=NOW, profile=other, context=octx).items is not first.items
    assert cache.misses == 3
    # Before the time a plan was made for, it is never reused.
    assert cache.get(p["id"], "x", "y", NOW - timedelta(seconds=1)) is None
