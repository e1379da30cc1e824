"""The same woman has the same ids in every build and at every site (uuid5 of the story key)."""
from __future__ import annotations

from datetime import timedelta

from seed_demo.scenario import build_site, pregnancy_id, woman_id
from seed_demo.stories import story


def _records(data_dir):
    from clinic.store import Store

    return {r["id"]: r for r in Store(data_dir).iter_records()}


def test_two_builds_at_the_same_now_are_identical(tmp_path, demo_dirs, demo_now):
    build_site(tmp_path / "again", "hospital", now=demo_now)
    assert _records(tmp_path / "again") == _records(demo_dirs["hospital"])


def test_builds_on_different_days_keep_the_ids(tmp_path, demo_dirs, demo_now):
    build_site(tmp_path / "later", "hospital", now=demo_now + timedelta(days=9, hours=5))
    assert set(_records(tmp_path / "later")) == set(_records(demo_dirs["hospital"]))


def test_moved_woman_is_one_pregnancy_in_both_clinics(demo_stores):
    s = story("a-moved-to-b")
    pid = pregnancy_id(s.key)
    a = demo_stores["clinic-a"].get(pid)
    b = demo_stores["clinic-b"].get(pid)
    assert a is not None and b is not None
    assert a["woman_id"] == b["woman_id"] == woman_id(s.key)
    assert a["facility"] == b["facility"] == "ambeni-hc"  # booked at Ambeni
    assert b["origin"]["via"] == "card" and b["origin"]["facility"] == "ambeni-hc"
    # Rusoka added entries of its own to the same pregnancy.
    own = [e for e in demo_stores["clinic-b"].entries(pid) if e["facility"] == "rusoka-hc"]
    assert {e["kind"] for e in own} >= {"screen", "dose"}
    assert not any(e["facility"] == "rusoka-hc" for e in demo_stores["clinic-a"].entries(pid))


def test_hospital_holds_copies_of_the_referred_women(demo_stores):
    for key, home in (("c-sensitised", "pellow-clinic"), ("b-to-hospital", "rusoka-hc")):
        pid = pregnancy_id(key)
        entries = demo_stores["hospital"].entries(pid)
        copies = [e for e in entries if e["facility"] == home]
        own = [e for e in entries if e["facility"] == "selvara-rh"]
        assert copies and own
        assert all(e["origin"]["via"] == "card" for e in copies)
