"""The district site comes with every facility's signed bundle; importing them all gives each
woman once (the same ids everywhere), and last month's coverage report has content."""
from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from seed_demo.scenario import FACILITY_SITES, pregnancy_id, pregnancy_ids
from seed_demo.sites import SITE_DEFS
from seed_demo.stories import STORIES


@pytest.fixture(scope="module")
def district(demo, demo_dirs, tmp_path_factory):
    """A copy of the demo district with every bundle imported once."""
    from clinic.reports.bundle import import_files
    from clinic.store import Store

    d = tmp_path_factory.mktemp("district") / "district"
    shutil.copytree(demo_dirs["district"], d)
    store = Store(d)
    results = import_files(store, d, sorted((d / "demo-bundles").glob("*.rhlb")), now=None)
    return d, store, results


def test_district_lists_a_bundle_per_facility(demo):
    bundles = demo["district"]["bundles"]
    assert {b["facility_id"] for b in bundles} == {SITE_DEFS[s].facility_id for s in FACILITY_SITES}
    for b in bundles:
        assert Path(b["file"]).is_file() and b["records"] > 0


def test_every_bundle_is_accepted(district):
    _, _, results = district
    assert [r.status for r in results] == ["imported"] * len(FACILITY_SITES), [r.message for r in results]


def test_each_woman_once_after_merging(district):
    _, store, _ = district
    pregnancies = store.pregnancies()
    assert sorted(p["id"] for p in pregnancies) == sorted(pid for s in STORIES for pid in pregnancy_ids(s))
    assert len(store.women_of()) == len(STORIES)


def test_importing_again_changes_nothing(district):
    from clinic.reports.bundle import import_files

    d, store, _ = district
    before = {r["id"]: r for r in store.iter_records()}
    again = import_files(store, d, sorted((d / "demo-bundles").glob("*.rhlb")))
    assert all(r.outcomes.get("created", 0) == 0 for r in again)
    assert {r["id"]: r for r in store.iter_records()} == before


def test_moved_woman_carries_entries_from_both_clinics(district):
    _, store, _ = district
    entries = store.entries(pregnancy_id("a-moved-to-b"))
    assert {e["facility"] for e in entries} == {"ambeni-hc", "rusoka-hc"}


def test_last_month_report_has_births_on_time_late_and_missed(district, demo_now):
    from clinic.reports.coverage import DISTRICT
    from clinic.reports.month import Month
    from clinic.reports.outputs import prepare

    d, store, _ = district
    month = Month.of(demo_now, store.settings.tz).shift(-1)
    report = prepare(store, d, month, now=demo_now, months=1).report
    cell = {ind: report.cells[(DISTRICT, ind)] for ind in
            ("births_neg", "postpartum_on_time", "postpartum_late", "postpartum_missed", "routine_on_time")}
    assert cell["births_neg"].numerator >= 9
    assert cell["postpartum_on_time"].numerator >= 3
    assert cell["postpartum_late"].numerator >= 3
    assert cell["postpartum_missed"].numerator >= 2
    assert cell["routine_on_time"].numerator >= 1
