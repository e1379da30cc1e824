"""Backups are checksummed copies; restore verifies them before it replaces anything."""
from __future__ import annotations

import tarfile
from datetime import timedelta

import pytest

from clinic.store import BackupInvalid, Store
from clinic.store.backup import list_backups, sha256_file
from tests.conftest import FACILITY_ID, USERNAME


def _tree(data_dir):
    """The store files a backup holds (hidden housekeeping files such as records/.journal are not)."""
    return {p.relative_to(data_dir).as_posix(): p.read_bytes()
            for d in ("records", "audit") for p in sorted((data_dir / d).rglob("*"))
            if p.is_file() and not p.name.startswith(".")}


def test_backup_and_restore_round_trip(data_dir, store, woman, pregnancy, now):
    saved = _tree(data_dir)
    path = store.backup(now=now)
    assert path.parent == data_dir / "backups" and path.name.startswith("rhledger-backup-20260316T093000")
    side = path.with_name(path.name + ".sha256")
    assert side.read_text().split()[0] == sha256_file(path)
    with tarfile.open(path) as tar:
        names = tar.getnames()
    assert "MANIFEST.sha256" in names and "config.toml" in names and "records/index.log" in names

    store.amend(woman["id"], {"village": "After Backup"}, by=USERNAME, reason="r", now=now)
    extra = store.create("woman", {"name": "Later Person", "stated_age": 22}, by=USERNAME, facility=FACILITY_ID,
                         now=now).record
    result = Store.restore(data_dir, path)
    assert _tree(data_dir) == saved
    assert result["safety_backup"] is not None and result["safety_backup"].exists()
    restored = Store(data_dir)
    assert restored.get(woman["id"])["village"] == "Upper Ridge" and restored.get(extra["id"]) is None
    # The running store notices the files were replaced under it.
    assert store.get(extra["id"]) is None


def test_safety_backup_holds_the_state_before_restore(data_dir, store, woman, now):
    path = store.backup(now=now)
    store.amend(woman["id"], {"village": "Kept In Safety"}, by=USERNAME, reason="r", now=now)
    safety = Store.restore(data_dir, path)["safety_backup"]
    Store.restore(data_dir, safety)
    assert Store(data_dir).get(woman["id"])["village"] == "Kept In Safety"


def test_altered_backup_is_refused_and_nothing_replaced(data_dir, store, woman, now):
    path = store.backup(now=now)
    store.amend(woman["id"], {"village": "Current"}, by=USERNAME, reason="r", now=now)
    before = _tree(data_dir)
    raw = bytearray(path.read_bytes())
    raw[len(raw) // 2] ^= 0xFF
    path.write_bytes(bytes(raw))
    with pytest.raises(BackupInvalid, match="altered or damaged"):
        Store.restore(data_dir, path)
    assert _tree(data_dir) == before
    assert [p for p in list_backups(data_dir) if "prerestore" in p.name] == []


def test_backup_with_a_consistently_altered_archive_but_no_checksum_file_is_refused(
    data_dir, store, woman, now, tmp_path
):
    path = store.backup(now=now)
    # Rewrite one member without updating the manifest, and drop the checksum file beside it.
    forged = tmp_path / path.name
    with tarfile.open(path) as src, tarfile.open(forged, "w:gz") as dst:
        for m in src.getmembers():
            data = src.extractfile(m).read()
            if m.name.endswith(".json") and m.name.startswith("records/test-clinic"):
                data = data.replace(b"Upper Ridge", b"Forged Ridg")
            import io

            m.size = len(data)
            dst.addfile(m, io.BytesIO(data))
    before = _tree(data_dir)
    with pytest.raises(BackupInvalid, match="does not match its SHA-256"):
        Store.restore(data_dir, forged)
    assert _tree(data_dir) == before


def test_backup_keeps_the_newest_n(data_dir, store, now):
    for i in range(7):
        store.backup(now=now + timedelta(minutes=i))
    kept = list_backups(data_dir)
    assert len(kept) == 5  # [backup] keep = 5 in the test config
    assert kept[-1].name.startswith("rhledger-backup-20260316T093600")


def test_daily_backup_runs_once_a_day(store, now):
    first = store.daily_backup_if_due(now=now)
    assert first is not None
    assert store.daily_backup_if_due(now=now + timedelta(hours=23)) is None
    assert store.daily_backup_if_due(now=now + timedelta(hours=24)) is not None


def test_restore_works_on_a_store_that_does_not_parse(data_dir, store, woman, now):
    from clinic.store import StoreCorrupt

    path = store.backup(now=now)
    (part,) = (data_dir / "records" / FACILITY_ID).glob("*.json")
    part.write_bytes(b"{broken")
    with pytest.raises(StoreCorrupt):
        Store(data_dir)
    Store.restore(data_dir, path)
    assert Store(data_dir).get(woman["id"])["name"] == "Amina Test Wanjiru"


def test_not_a_backup_is_refused(data_dir, store, tmp_path):
    junk = tmp_path / "rhledger-backup-x.tar.gz"
    junk.write_bytes(b"hello")
    with pytest.raises(BackupInvalid, match="cannot be read"):
        Store.restore(data_dir, junk)
