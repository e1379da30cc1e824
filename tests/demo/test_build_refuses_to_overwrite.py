"""build_site never deletes what is not demo data, and says what to do instead."""
from __future__ import annotations

from datetime import datetime

import pytest

from seed_demo.scenario import DemoError, build_site


def test_non_empty_directory_needs_force(tmp_path, demo_now):
    d = tmp_path / "d"
    d.mkdir()
    (d / "config.toml").write_text("# an installation made by `rhledger init`, no records yet\n", encoding="utf-8")
    with pytest.raises(DemoError, match="force"):
        build_site(d, "hospital", now=demo_now)
    assert (d / "config.toml").exists()


def test_force_does_not_delete_a_folder_that_is_not_rhledger_data(tmp_path, demo_now):
    d = tmp_path / "mine"
    d.mkdir()
    (d / "thesis.txt").write_text("keep me", encoding="utf-8")
    with pytest.raises(DemoError, match="not deleted"):
        build_site(d, "clinic-a", now=demo_now, force=True)
    assert (d / "thesis.txt").read_text(encoding="utf-8") == "keep me"


def test_unknown_site_is_refused_naming_the_sites(tmp_path):
    with pytest.raises(DemoError, match="clinic-a"):
        build_site(tmp_path / "x", "clinic-z")
    assert not (tmp_path / "x").exists()


def test_naive_now_is_refused(tmp_path):
    with pytest.raises(ValueError, match="timezone-aware"):
        build_site(tmp_path / "x", "clinic-a", now=datetime(2026, 12, 1, 9, 0))


@pytest.mark.parametrize("with_records", [True, False])
def test_force_never_deletes_a_real_installation(tmp_path, demo_now, with_records):
    d = tmp_path / "clinic"
    (d / "keys").mkdir(parents=True)
    (d / "config.toml").write_text('[facility]\nid = "real-clinic"\n', encoding="utf-8")
    (d / "keys" / "facility.json").write_text("{}", encoding="utf-8")
    if with_records:
        (d / "records").mkdir()
        (d / "records" / "store.json").write_text('{"schema": 1}', encoding="utf-8")
    with pytest.raises(DemoError, match="never deleted"):
        build_site(d, "clinic-a", now=demo_now, force=True)
    assert (d / "keys" / "facility.json").exists()
    assert (d / "records" / "store.json").exists() == with_records


def test_force_replaces_an_earlier_demo(tmp_path, demo_now, demo_dirs):
    import shutil

    d = tmp_path / "old-demo"
    shutil.copytree(demo_dirs["hospital"], d)
    summary = build_site(d, "hospital", now=demo_now, force=True)
    assert summary["counts"]["women"] > 0
