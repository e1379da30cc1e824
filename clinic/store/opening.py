"""Opening a data directory (store lock held): leftovers of a killed writer removed, the schema
version read, every partition file changed since the last open parsed (a file that does not
parse is refused with the newest backup and the command to restore it), the index checked
against the partitions (and rebuilt from them when it is missing or short), and records
migrated to this code's schema.

The partitions are the truth; the index log only says where each record is. A deleted,
truncated or damaged index would make records vanish from every list without a word, so each
open compares, partition by partition, how many records the index places there with how many
the partition holds (cached beside the verification keys), and looks closer where the index
has fewer. A record the index lacks makes the store rebuild the index from the partitions
(``rebuild_index``; also ``rhledger check --repair``); when that cannot be written the store
refuses to open and names the command.
"""
from __future__ import annotations

import json
import logging
import os
from pathlib import Path
from typing import Callable

from clinic.store import backup as backups
from clinic.store import migrate
from clinic.store.errors import StoreCorrupt
from clinic.store.index import IndexLog, Loc
from clinic.store.layout import INDEX_FILE, META_FILE, VERIFIED_FILE, partition_files
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
log = logging.getLogger("rhledger.store")
REPAIR = "rhledger check --repair --data {data_dir}"


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
                 backup_first: Callable[[], object]) -> list[str]:
    """Make ``records_dir`` ready to read and write; ``backup_first`` runs before a migration.
    Returns notes on what was repaired (an index rebuilt)."""
    ensure_dir(records_dir)
    # Temp files of a writer killed mid-write (we hold the lock: no writer is running).
    for pattern in ("*/.*.tmp", ".*.tmp", f"../{backups.BACKUP_DIR}/.*.tmp"):
        for tmp in records_dir.glob(pattern):
            tmp.unlink()
    meta_path = records_dir / META_FILE
    meta = _read_meta(meta_path, on_corrupt)
    index.refresh()
    files = partition_files(records_dir)
    counts = _verify(records_dir, pcache, files)
    notes = ensure_index(records_dir, index, pcache, counts)
    if meta is None:
        if files or index.locs:
            raise on_corrupt(meta_path, ValueError("the schema version file is missing"))
        _write_meta(meta_path, migrate.target_version())
        return notes
    _migrate(meta_path, pcache, int(meta["schema"]), files, backup_first)
    return notes


# ---- the index against the partitions ------------------------------------------------------

def _ids_in(pcache: PartitionCache, path: Path) -> list[dict]:
    data, _ = pcache.scan(path)
    return [d for d in (data or {}).get(TABLE, {}).values() if isinstance(d, dict) and "id" in d]


def missing_from_index(records_dir: Path, index: IndexLog, pcache: PartitionCache,
                       counts: dict[str, int] | None = None) -> list[tuple[str, str]]:
    """(record id, partition) of every stored record the index does not place where it is.

    ``counts``: records per partition (relative path -> n) when known; only partitions where the
    index places fewer are then read (an extra index line of an interrupted write is harmless)."""
    out = []
    for path in partition_files(records_dir):
        rel = path.relative_to(records_dir).as_posix()
        part = rel[: -len(".json")]
        if counts is not None and rel in counts and index.per_partition.get(part, 0) >= counts[rel]:
            continue
        for doc in _ids_in(pcache, path):
            hit = index.locs.get(doc["id"])
            if hit is None or hit[0] != part:
                out.append((doc["id"], part))
    return out


def rebuild_index(records_dir: Path, index: IndexLog, pcache: PartitionCache) -> int:
    """Write the index again from the partitions (the truth), in creation order; returns the
    number of records it places. The old log is kept beside it as ``.index.log.replaced``."""
    rows = []
    seen: set[str] = set()
    with gc_paused():
        for path in partition_files(records_dir):
            part = path.relative_to(records_dir).with_suffix("").as_posix()
            for doc in _ids_in(pcache, path):
                if doc["id"] in seen:
                    continue  # stored twice: `rhledger check` reports it; the first copy is placed
                seen.add(doc["id"])
                loc = Loc(part, str(doc.get("kind")), doc.get("woman_id"), doc.get("pregnancy_id"))
                rows.append((str(doc.get("created_at") or ""), doc["id"], loc))
    rows.sort(key=lambda r: (r[0], r[1]))
    payload = "".join(IndexLog.line(rid, loc) + "\n" for _, rid, loc in rows).encode("utf-8")
    target = records_dir / INDEX_FILE
    if target.exists():
        old = target.with_name(f".{INDEX_FILE}.replaced")
        os.replace(target, old)
    atomic_write_bytes(target, payload)
    index.refresh()
    return len(rows)


def ensure_index(records_dir: Path, index: IndexLog, pcache: PartitionCache,
                 counts: dict[str, int] | None = None) -> list[str]:
    """Rebuild the index when a stored record is missing from it (store lock held)."""
    missing = missing_from_index(records_dir, index, pcache, counts)
    if not missing:
        return []
    data_dir = records_dir.parent
    what = (f"the index {records_dir / INDEX_FILE} did not list {len(missing)} stored record(s) "
            f"(e.g. {missing[0][0]} in {missing[0][1]}): it was deleted, cut short or damaged")
    try:
        n = rebuild_index(records_dir, index, pcache)
    except OSError as e:
        raise StoreCorrupt(f"{what}, and it cannot be rebuilt here ({e.strerror or e}). Nothing was changed. "
                           f"Make the folder writable, then run:\n  {REPAIR.format(data_dir=data_dir)}") from None
    note = f"{what}; rebuilt from the partition files: {n} records listed again"
    log.warning(note)
    return [note]


def load_verified(records_dir: Path) -> dict:
    """The open-time verification cache: partition (relative path) -> [inode, mtime_ns, size]."""
    try:
        seen = json.loads((records_dir / VERIFIED_FILE).read_bytes())
    except (FileNotFoundError, ValueError):
        return {}  # only a cache of earlier checks: without it every file is parsed
    return seen if isinstance(seen, dict) else {}


def _verify(records_dir: Path, pcache: PartitionCache, files: list[Path]) -> dict[str, int]:
    """Parse every partition file changed since the last open verified it; returns the number
    of records in each partition (relative path -> n).

    ``records/.verified.json`` remembers (inode, mtime_ns, size, records) of each file that
    parsed, so opening a large store re-reads only what changed (our own writes replace a
    file, which always gives it a new inode). ``check`` parses everything regardless.
    """
    seen = load_verified(records_dir)
    now_ok = {}
    counts = {}
    # Parsed to check, not kept (a full pass would only churn the read cache), and no
    # garbage collection meanwhile: each collection would walk the whole index again.
    with gc_paused():
        for p in files:
            rel = p.relative_to(records_dir).as_posix()
            key = list(file_key(p.stat()))
            known = seen.get(rel)
            if isinstance(known, list) and len(known) == 4 and known[:3] == key:
                n = known[3]
            else:
                data, _ = pcache.scan(p)  # StoreCorrupt names the file, the newest backup and the command
                n = len((data or {}).get(TABLE, {}))
            now_ok[rel] = key + [n]
            counts[rel] = n
    if now_ok != seen:
        try:
            atomic_write_bytes(records_dir / VERIFIED_FILE, json.dumps(now_ok, separators=(",", ":")).encode())
        except OSError:
            pass  # only a cache (a read-only folder still opens for reading)
    return counts


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
