"""The durable record store: ``Store``, made of one room per job.

=================  =============================================================
``writer``         the lock (thread + cross-process) and the ordered write: journal,
                   index line, partition file, audit line (one record or a batch)
``records_api``    create / amend / void and every read (``Created``)
``merge``          import and merge: merge_foreign, merge_foreign_many, check_foreign
``check``          the full check behind ``rhledger check`` (``CheckReport``)
``opening``        opening a data directory: leftovers, schema, verification, migration
``layout``         where the files are, and which partition a new record goes to
=================  =============================================================

Envelope checks (ids, facility, parents, times, origin, schema) are in
``clinic.records.envelope``, beside validation. Backups and restore are below.
"""
from __future__ import annotations

import json
from datetime import datetime, timedelta
from pathlib import Path

import filelock

from clinic.config import ConfigError, Settings, load_settings
from clinic.store import backup as backups
from clinic.store import migrate
from clinic.store.check import Checking
from clinic.store.errors import StoreBusy, unwritable
from clinic.store.layout import LOCK_FILE, RECORDS_DIR
from clinic.store.merge import Merging
from clinic.store.opening import open_records, rebuild_index
from clinic.store.records_api import RecordsAPI
from clinic.store.storage import ensure_dir

DAY = timedelta(days=1)


class Store(RecordsAPI, Merging, Checking):
    """All records of one data directory. Thread-safe; safe to share with other processes."""

    def __init__(self, data_dir: str | Path, settings: Settings | None = None, *,
                 lock_timeout: float | None = None, cache_partitions: int = 64,
                 seal: backups.Seal | None = None):
        # Signs this store's backups with the facility key (see clinic.store.backup).
        self.seal = seal
        super().__init__(data_dir, settings, lock_timeout=lock_timeout, cache_partitions=cache_partitions)
        with self._locked():
            self.recovered += open_records(self.records_dir, self._index, self._pcache, on_corrupt=self._corrupt,
                                           backup_first=lambda: self.backup(label="premigrate"))

    def repair_index(self) -> int:
        """Write the index again from the partition files (``rhledger check --repair``); returns
        the number of records it lists."""
        with self._locked():
            return rebuild_index(self.records_dir, self._index, self._pcache)

    # ---- backups ----------------------------------------------------------------------

    def backup(self, *, label: str = "backup", now: datetime | None = None) -> Path:
        """A checksummed copy of the store files in <data>/backups (keeps settings.backups_keep)."""
        with self._locked():
            return backups.make_backup(self.data_dir, label=label, keep=self.settings.backups_keep,
                                       now=now, facility=self.settings.facility_id,
                                       schema=migrate.target_version(), seal=self.seal)

    def daily_backup_if_due(self, now: datetime | None = None) -> Path | None:
        """Back up when the newest regular backup is a day old or more (or there is none)."""
        now = self._now(now)
        with self._locked():
            last = [p for p in backups.list_backups(self.data_dir) if p.name.startswith("rhledger-backup-")]
            when = backups.backup_time(last[-1]) if last else None
            if when is not None and now - when < DAY:
                return None
            return self.backup(now=now)

    @classmethod
    def restore(cls, data_dir: str | Path, backup_file: str | Path, *,
                now: datetime | None = None, seal: backups.Seal | None = None,
                from_facility: str | None = None, unverified: bool = False) -> dict:
        """Replace the store of ``data_dir`` by a backup, after verifying its checksums and,
        with ``seal``, its signature (``backup.origin_notes``: another facility's backup needs
        ``from_facility``; an unsigned or unknown signer's, ``unverified``).

        A safety backup of the current files is made first (even when they do not parse).
        Returns {"restored": path, "safety_backup": path or None, "info": {...}, "notes": [...]}.
        """
        data_dir = Path(data_dir)
        try:
            return cls._restore(data_dir, backup_file, now=now, seal=seal, from_facility=from_facility,
                                unverified=unverified)
        except OSError as e:
            raise unwritable(e, data_dir) or e from None

    @classmethod
    def _restore(cls, data_dir: Path, backup_file: str | Path, *, now: datetime | None, seal: backups.Seal | None,
                 from_facility: str | None, unverified: bool) -> dict:
        archive = backups.read_archive(Path(backup_file))
        files, info = archive.files, archive.info
        here = _facility_of(data_dir)
        notes = archive.notes + backups.origin_notes(archive, str(backup_file), seal=seal, here=here,
                                                     from_facility=from_facility, unverified=unverified)
        for name, content in files.items():
            if name.startswith(f"{RECORDS_DIR}/") and name.endswith(".json"):
                try:
                    json.loads(content)
                except ValueError as e:
                    raise backups.BackupInvalid(f"{backup_file}: {name} does not parse ({e}); "
                                                f"nothing was restored") from None
        ensure_dir(data_dir)
        lock = filelock.FileLock(str(data_dir / LOCK_FILE), thread_local=False)
        try:
            lock.acquire(timeout=cls.lock_timeout)
        except filelock.Timeout:
            raise StoreBusy(f"the store in {data_dir} is in use (lock {data_dir / LOCK_FILE}); "
                            f"stop the server and try again") from None
        try:
            safety = None
            if backups.store_files(data_dir) and any(
                    p.parts[0] in backups.STORE_DIRS for p in backups.store_files(data_dir)):
                try:
                    keep = load_settings(data_dir).backups_keep
                except ConfigError:
                    keep = None  # a missing or broken config.toml must not stop a restore: keep all
                safety = backups.make_backup(data_dir, label="prerestore", keep=keep, now=now,
                                             facility=here or "", seal=seal)
            backups.install(data_dir, files)
        finally:
            lock.release()
        return {"restored": Path(backup_file), "safety_backup": safety, "info": info, "notes": notes}


def _facility_of(data_dir: Path) -> str | None:
    """This installation's facility, or None when it has no readable config.toml yet."""
    try:
        return load_settings(data_dir).facility_id
    except ConfigError:
        return None
