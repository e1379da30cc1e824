"""Demo fixtures: every demo site built once per test session into a temporary folder.

The builds use one fixed ``demo_now`` so that the tests and the data agree on "today";
the stories are relative to it, so any instant works (some tests rebuild at others).
"""
from __future__ import annotations

from datetime import datetime, timezone
from pathlib import Path

import pytest

from seed_demo.scenario import FACILITY_SITES, SITES, build_site


@pytest.fixture(scope="session")
def demo_now() -> datetime:
    return datetime.now(timezone.utc).replace(microsecond=0)


@pytest.fixture(scope="session")
def demo(tmp_path_factory, demo_now) -> dict[str, dict]:
    """site -> the summary build_site returned (its data_dir holds the installation)."""
    root = tmp_path_factory.mktemp("demo-sites")
    out = {site: build_site(root / site, site, now=demo_now) for site in FACILITY_SITES}
    out["district"] = build_site(root / "district", "district", now=demo_now,
                                 bundle_sources={site: root / site for site in FACILITY_SITES})
    assert set(out) == set(SITES)
    return out


@pytest.fixture(scope="session")
def demo_dirs(demo) -> dict[str, Path]:
    return {site: Path(s["data_dir"]) for site, s in demo.items()}


@pytest.fixture(scope="session")
def demo_stores(demo_dirs):
    from clinic.store import Store

    return {site: Store(d) for site, d in demo_dirs.items()}
