"""Opening a data directory (store lock held): leftovers of a killed writer removed, the schema
version read, every partition file changed since the last open parsed (a file that does not
parse is refused with the newest backup and the command to restore it), and records migrated
to this code's schema."""
from __future__ import annotations

import json
from pathlib import Path
from typing import Callable

from clinic.store import backup as backups
from clinic.store import migrate
from clinic.store.errors import StoreCorrupt
from clinic.store.index import IndexLog
from clinic.store.layout import META_FILE, VERIFIED_FILE, partition_files
from clinic.store.storage import (
    TABLE,
    AtomicJSONStorage,
    PartitionCache,
    atomic_write_bytes,
    ensure_dir,
    file_key,
    gc_paused,
)

OnCorrupt = Callable[[Path, Exception], StoreCorrupt]


def corrupt_error(data_dir: Path, path: Path, err: Exception) -> StoreCorrupt:
    """The error for a store file that does not parse: it names the newest backup and the
    command that restores it."""
    newest = backups.newest_backup(data_dir)
    if newest is not None:
        how = (f"The newest backup is {newest}. To restore it (a safety copy of the current "
               f"files is made first) run:\n  rhledger restore {newest} --data {data_dir}")
    else:
        how = (f"There is no backup in {data_dir / backups.BACKUP_DIR}. To restore one from "
               f"elsewhere run:\n  rhledger restore FILE --data {data_dir}")
    return StoreCorrupt(f"{path} does not parse ({err}). The file has been left untouched. {how}")


def open_records(records_dir: Path, index: IndexLog, pcache: PartitionCache, *, on_corrupt: OnCorrupt,
                 backup_first: Callable[[], object]) -> None:
    """Make ``records_dir`` ready to read and write; ``backup_first`` runs before a migration."""
    ensure_dir(records_dir)
    # Temp files of a writer killed mid-write (we hold the lock: no writer is running).
    for pattern in ("*/.*.tmp", ".*.tmp", f"../{backups.BACKUP_DIR}/.*.tmp"):
        for tmp in records_dir.glob(pattern):
            tmp.unlink()
    meta_path = records_dir / META_FILE
    meta = _read_meta(meta_path, on_corrupt)
    index.refresh()
    files = partition_files(records_dir)
    _verify(records_dir, pcache, files)
    if meta is None:
        if files or index.locs:
            raise on_corrupt(meta_path, ValueError("the schema version file is missing"))
        _write_meta(meta_path, migrate.target_version())
        return
    _migrate(meta_path, pcache, int(meta["schema"]), files, backup_first)


def load_verified(records_dir: Path) -> dict:
    """The open-time verification cache: partition (relative path) -> [inode, mtime_ns, size]."""
    try:
        seen = json.loads((records_dir / VERIFIED_FILE).read_bytes())
    except (FileNotFoundError, ValueError):
        return {}  # only a cache of earlier checks: without it every file is parsed
    return seen if isinstance(seen, dict) else {}


def _verify(records_dir: Path, pcache: PartitionCache, files: list[Path]) -> None:
    """Parse every partition file changed since the last open verified it.

    ``records/.verified.json`` remembers (inode, mtime_ns, size) of each file that parsed,
    so opening a large store re-reads only what changed (our own writes replace a file,
    which always gives it a new inode). ``check`` parses everything regardless.
    """
    seen = load_verified(records_dir)
    now_ok = {}
    # Parsed to check, not kept (a full pass would only churn the read cache), and no
    # garbage collection meanwhile: each collection would walk the whole index again.
    with gc_paused():
        for p in files:
            rel = p.relative_to(records_dir).as_posix()
            key = list(file_key(p.stat()))
            if seen.get(rel) != key:
                pcache.scan(p)  # StoreCorrupt names the file, the newest backup and the command
            now_ok[rel] = key
    if now_ok != seen:
        atomic_write_bytes(records_dir / VERIFIED_FILE, json.dumps(now_ok, separators=(",", ":")).encode())


def _read_meta(meta_path: Path, on_corrupt: OnCorrupt) -> dict | None:
    try:
        raw = meta_path.read_bytes()
    except FileNotFoundError:
        return None
    try:
        meta = json.loads(raw)
        int(meta["schema"])
    except (ValueError, KeyError, TypeError) as e:
        raise on_corrupt(meta_path, e) from None
    return meta


def _write_meta(meta_path: Path, version: int) -> None:
    atomic_write_bytes(meta_path, json.dumps({"schema": version}).encode())


def _migrate(meta_path: Path, pcache: PartitionCache, current: int, files: list[Path],
             backup_first: Callable[[], object]) -> None:
    target = migrate.target_version()
    migrate.check_path(current, target)
    if current == target:
        return
    backup_first()
    for path in files:
        data = pcache.load(path) or {}
        table = data.get(TABLE, {})
        changed = False
        new_table = {}
        for doc_id, doc in table.items():
            new, ch = migrate.upgrade_record(doc, target)
            new_table[doc_id] = new
            changed = changed or ch
        if changed:
            AtomicJSONStorage(path, pcache).write({**data, TABLE: new_table})
    _write_meta(meta_path, target)
