"""The ordered write and the lock: the base every part of ``Store`` builds on.

One lock: a thread lock, then (once per thread nesting) the cross-process file lock
``store.lock``; taking it first settles a write that stopped midway (see ``journal``).
Everything that writes holds it; reads take the thread lock only and see other processes'
writes through the index log (read incrementally) and the partition cache (keyed by file).

A write notes what it is about to change in ``records/.journal`` (a crash never leaves a
stored change without its audit line), appends new records to the index log, rewrites the
partition file (atomically, see ``storage``), appends the audit lines (fsync'd), empties
the journal, and only then returns. ``_write`` does that for one record; ``_write_batch``
for a whole import, rewriting each partition it touches once.
"""
from __future__ import annotations

import json
import threading
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Callable, Iterable, Mapping

import filelock
from tinydb import TinyDB

from clinic.config import Settings, load_settings
from clinic.store.audit import AuditLog
from clinic.store.errors import StoreBusy, StoreCorrupt, unwritable
from clinic.store.index import IndexLog, Loc
from clinic.store.journal import JOURNAL_FILE, Journal
from clinic.store.layout import AUDIT_DIR, INDEX_FILE, LOCK_FILE, META_FILE, RECORDS_DIR, VERIFIED_FILE, partition_for
from clinic.store.opening import corrupt_error, ensure_index, load_verified
from clinic.store.storage import (
    TABLE,
    AtomicJSONStorage,
    PartitionCache,
    append_lines,
    atomic_write_bytes,
    ensure_dir,
    file_key,
)

# (the local copy or None, the incoming record) -> (outcome, the audit entry when it is to be stored)
Decide = Callable[[dict | None, dict], tuple[str, dict | None]]


def _deep(v: Any) -> Any:
    if isinstance(v, dict):
        return {k: _deep(x) for k, x in v.items()}
    if isinstance(v, list):
        return [_deep(x) for x in v]
    return v


def copy_record(record: dict) -> dict:
    """A copy callers may change without touching the read cache (JSON values only)."""
    out = dict(record)
    for k, v in out.items():
        if isinstance(v, (dict, list)):
            out[k] = _deep(v)
    return out


class Writer:
    """The files of one data directory, their lock, reads from the cache, and ordered writes.

    Not opened by itself: ``Store.__init__`` opens the directory (see ``opening``)."""

    lock_timeout = 30.0

    def __init__(self, data_dir: str | Path, settings: Settings | None = None, *,
                 lock_timeout: float | None = None, cache_partitions: int = 64):
        self.data_dir = Path(data_dir)
        self.settings = settings if settings is not None else load_settings(self.data_dir)
        self.tz = self.settings.tz
        if lock_timeout is not None:
            self.lock_timeout = lock_timeout
        self.records_dir = self.data_dir / RECORDS_DIR
        self.meta_path = self.records_dir / META_FILE
        self._tlock = threading.RLock()
        self._depth = 0
        try:
            ensure_dir(self.data_dir)
        except OSError as e:
            raise unwritable(e, self.data_dir) or e from None
        self._flock = filelock.FileLock(str(self.data_dir / LOCK_FILE), thread_local=False)
        self._pcache = PartitionCache(cache_partitions, on_corrupt=self._corrupt)
        self._index = IndexLog(self.records_dir / INDEX_FILE, on_corrupt=self._corrupt)
        self._audit = AuditLog(self.data_dir / AUDIT_DIR, on_corrupt=self._corrupt)
        self._journal = Journal(self.records_dir / JOURNAL_FILE, self.records_dir, self.data_dir / AUDIT_DIR,
                                self._ppath)
        self.recovered: list[str] = []  # what recovering interrupted writes did (check reports it)

    # ---- locking ----------------------------------------------------------------------

    def _corrupt(self, path: Path, err: Exception) -> StoreCorrupt:
        return corrupt_error(self.data_dir, path, err)

    @contextmanager
    def _locked(self):
        """The thread lock, then (once per thread nesting) the cross-process file lock.

        A full disk or a read-only folder met inside becomes StoreUnwritable, in plain words."""
        try:
            with self._locked_inner():
                yield
        except OSError as e:
            u = unwritable(e, self.data_dir)
            if u is None:
                raise
            raise u from e

    @contextmanager
    def _locked_inner(self):
        with self._tlock:
            if self._depth == 0:
                try:
                    self._flock.acquire(timeout=self.lock_timeout)
                except filelock.Timeout:
                    raise StoreBusy(f"the store in {self.data_dir} is locked by another process "
                                    f"(waited {self.lock_timeout:g} s for {self._flock.lock_file}); "
                                    f"try again when it has finished") from None
                try:
                    self._settle()
                except BaseException:
                    self._flock.release()
                    raise
            self._depth += 1
            try:
                yield
            finally:
                self._depth -= 1
                if self._depth == 0:
                    self._flock.release()

    def _settle(self) -> None:
        """A write (of any process) that stopped before it finished is completed or dropped
        (see ``journal``) before anything else is read or written. Store lock held."""
        if self._journal.pending():
            self.recovered += self._journal.recover()

    # ---- reading (thread lock held) -----------------------------------------------------

    def _now(self, now: datetime | None) -> datetime:
        if now is None:
            return datetime.now(timezone.utc)
        if now.tzinfo is None:
            raise ValueError("now must be timezone-aware")
        return now

    def _ppath(self, partition: str) -> Path:
        return self.records_dir / f"{partition}.json"

    def _refresh(self) -> None:
        if self._index.refresh():
            # The log was replaced, cut or removed under us: never read on from a short index.
            with self._locked():
                self.recovered += ensure_index(self.records_dir, self._index, self._pcache)

    def _get(self, rid: str) -> dict | None:
        """The cached record itself (not a copy: callers copy before handing it out)."""
        loc = self._index.get(rid)
        if loc is None:
            return None
        hit = self._pcache.by_id(self._ppath(loc.partition)).get(rid)
        return hit[1] if hit is not None else None

    def _fetch(self, ids: Iterable[str]) -> list[dict]:
        """Records for ids (in the order given, copies), reading each partition once."""
        ids = list(ids)
        by_part: dict[str, list[str]] = {}
        for rid in ids:
            loc = self._index.get(rid)
            if loc is not None:
                by_part.setdefault(loc.partition, []).append(rid)
        found: dict[str, dict] = {}
        for part, rids in by_part.items():
            table = self._pcache.by_id(self._ppath(part))
            for rid in rids:
                hit = table.get(rid)
                if hit is not None:
                    found[rid] = hit[1]
        return [copy_record(found[r]) for r in ids if r in found]

    def _ids_of(self, kind: str | None) -> list[str]:
        if kind is None:
            return list(self._index.order)
        return list(self._index.by_kind.get(kind, ()))

    def _new_loc(self, record: dict, planned: Mapping[str, Loc] | None = None) -> Loc:
        """Where a new record goes; ``planned``: locations of records earlier in the same batch."""
        parent = None
        if record.get("pregnancy_id"):
            parent = self._index.get(record["pregnancy_id"])
            if parent is None and planned:
                parent = planned.get(record["pregnancy_id"])
        return Loc(partition_for(record, self.tz, parent), record["kind"], record.get("woman_id"),
                   record.get("pregnancy_id"))

    # ---- writing one record (store lock held) -------------------------------------------

    def _write(self, record: dict, entry: dict) -> None:
        """Store one record and its audit line, in the journal's order."""
        rid = record["id"]
        loc = self._index.get(rid)
        new = loc is None
        if new:
            loc = self._new_loc(record)
        apath = self._audit.path_for(entry["facility"], entry["at"])
        line = self._audit.line(entry)
        self._settle()  # an earlier write of this same lock hold may have failed midway
        self._journal.begin([apath])
        self._journal.chunk(loc.partition, [(apath, line)])
        if new:
            # Before the partition write: a crash in between leaves a line that points at
            # nothing (reads skip it, a retry fills it); never a record the index cannot find.
            self._index.append(rid, loc)
        self._put(record, loc.partition)
        append_lines(apath, [line])
        self._journal.finish()

    def _put(self, record: dict, partition: str) -> None:
        """Insert or replace one record in its partition (journal written)."""
        rid = record["id"]
        path = self._ppath(partition)
        db = TinyDB(path, storage=AtomicJSONStorage, cache=self._pcache)
        table = db.table(TABLE, cache_size=0)
        try:
            hit = self._pcache.by_id(path).get(rid)
            if hit is None:
                table.insert(record)
            else:
                def replace(doc, rec=record):
                    doc.clear()
                    doc.update(rec)
                table.update(replace, doc_ids=[int(hit[0])])
        except BaseException:
            self._pcache.drop(path)
            raise

    # ---- writing a batch (store lock held) ----------------------------------------------

    def _write_batch(self, incoming: list[dict], by_part: dict[str, list[int]],
                     new_locs: list[tuple[str, Loc]], decide: Decide, *, at: str) -> list[str]:
        """Store a batch: the new records' index lines in one append, each partition of
        ``by_part`` (partition -> positions in ``incoming``) rewritten once after its journal
        chunk, the audit lines appended one batch per audit file, in batch order.

        ``decide`` says, record by record in batch order, what to store; returns its outcomes.
        """
        facilities = {rec["facility"] for rec in incoming}
        self._settle()
        self._journal.begin([self._audit.path_for(f, at) for f in facilities])
        if new_locs:
            self._index.append_many(new_locs)
        outcomes: list[str | None] = [None] * len(incoming)
        audit_lines: dict[Path, list[tuple[int, str]]] = {}
        written: list[tuple[Path, int]] = []
        for part, positions in by_part.items():
            n = self._rewrite_partition(part, positions, incoming, decide, outcomes, audit_lines)
            if n is not None:
                written.append((self._ppath(part), n))
        # The audit lines in the order one write at a time would have appended them.
        for apath, lines in audit_lines.items():
            lines.sort(key=lambda t: t[0])
            append_lines(apath, [line for _, line in lines])
        self._journal.finish()
        self._mark_verified(written)
        return outcomes  # type: ignore[return-value]  # every position is in one partition

    def _rewrite_partition(self, part: str, positions: list[int], incoming: list[dict], decide: Decide,
                           outcomes: list[str | None],
                           audit_lines: dict[Path, list[tuple[int, str]]]) -> int | None:
        """Decide the batch's records of one partition and rewrite it once; the number of records
        it holds when it was rewritten, else None."""
        path = self._ppath(part)
        data = self._pcache.load(path) or {}
        table = dict(data.get(TABLE, {}))  # doc id -> record; the cached one is left as it is
        doc_of = {rid: doc_id for rid, (doc_id, _) in self._pcache.by_id(path).items()}
        next_id = max((int(k) for k in table), default=0) + 1  # as TinyDB numbers inserts
        chunk: list[tuple[Path, str]] = []
        for i in positions:
            rec = incoming[i]
            doc_id = doc_of.get(rec["id"])
            local = table[doc_id] if doc_id is not None else None
            outcome, entry = decide(local, rec)
            outcomes[i] = outcome
            if entry is None:
                continue
            if doc_id is None:
                doc_id = doc_of[rec["id"]] = str(next_id)
                next_id += 1
            table[doc_id] = rec
            apath = self._audit.path_for(entry["facility"], entry["at"])
            line = self._audit.line(entry)
            chunk.append((apath, line))
            audit_lines.setdefault(apath, []).append((i, line))
        if not chunk:
            return None
        new_data = {**data, TABLE: table}
        payload = json.dumps(new_data, ensure_ascii=False, separators=(",", ":")).encode("utf-8")
        self._journal.chunk(part, chunk)
        try:
            atomic_write_bytes(path, payload)
        except BaseException:
            self._pcache.drop(path)
            raise
        self._pcache.stored(path, new_data)
        return len(table)

    def _mark_verified(self, paths: list[tuple[Path, int]]) -> None:
        """Add partitions this process just wrote (from its own serialised JSON) to the open-time
        verification cache, so the next open does not parse a whole import's partitions again."""
        if not paths:
            return
        try:
            seen = load_verified(self.records_dir)
            for p, n in paths:
                seen[p.relative_to(self.records_dir).as_posix()] = list(file_key(p.stat())) + [n]
            atomic_write_bytes(self.records_dir / VERIFIED_FILE, json.dumps(seen, separators=(",", ":")).encode())
        except OSError:
            pass  # only a cache: without it the next open parses these files, and that is all
