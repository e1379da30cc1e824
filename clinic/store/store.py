"""The durable record store: partitioned TinyDB files, one lock, an index log and an audit log.

Layout under the data directory::

    store.lock                          cross-process lock (filelock)
    records/store.json                  {"schema": N}: the stored schema version
    records/index.log                   one line per record: id partition kind woman pregnancy
    records/<facility>/<YYYY-MM>.json   a pregnancy (by booking month) with all its entries,
                                        and women (by the month they were registered)
    records/<facility>/stock-<YYYY>.json  anti-D stock movements
    audit/<facility>/<YYYY-MM>.jsonl    one JSON line per create, amend, void and import
    backups/rhledger-*.tar.gz           see clinic.store.backup

A write notes what it is about to change in ``records/.journal`` (see ``journal``: a crash
never leaves a stored change without its audit line), appends new records to the index log,
rewrites one partition file (atomically, see ``storage``), appends to the audit log (fsync'd)
and only then returns. ``merge_foreign_many`` does the same for a whole import, rewriting each
partition it touches once.
"""
from __future__ import annotations

import functools
import json
import re
import threading
import uuid
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone
from pathlib import Path
from typing import Any, Iterable, Iterator, Mapping

import filelock
from tinydb import TinyDB

from clinic.config import ConfigError, Settings, load_settings
from clinic.records.schema import ENVELOPE_FIELDS, KINDS
from clinic.records.validate import ValidationError, validate_record
from clinic.records.values import parse_utc, utc_text
from clinic.store import backup as backups
from clinic.store import migrate
from clinic.store.audit import AuditLog
from clinic.store.errors import Conflict, NotFound, StoreBusy, StoreCorrupt, StoreError
from clinic.store.index import IndexLog, Loc
from clinic.store.journal import JOURNAL_FILE, Journal
from clinic.store.search import name_score, normalise_name, phone_digits, phones_match, search
from clinic.store.storage import (TABLE, AtomicJSONStorage, PartitionCache, append_lines, atomic_write_bytes,
                                  ensure_dir, file_key, gc_paused)

RECORDS_DIR = "records"
AUDIT_DIR = "audit"
META_FILE = "store.json"
INDEX_FILE = "index.log"
LOCK_FILE = "store.lock"
VERIFIED_FILE = ".verified.json"

SAFE_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.:-]{0,63}$")
SAFE_FACILITY = re.compile(r"^[A-Za-z0-9_-]{1,32}$")
ORIGIN_VIA = ("card", "bundle")
# Compared when deciding whether two copies of a record hold the same content.
_NOT_CONTENT = ("origin", "schema")
DAY = timedelta(days=1)


_ENVELOPE = frozenset(ENVELOPE_FIELDS)


@functools.lru_cache(maxsize=None)
def _field_names(kind: str) -> frozenset[str]:
    return frozenset(KINDS[kind].field_names)


def fields_of(record: Mapping[str, Any]) -> dict[str, Any]:
    """The kind's fields of a stored record (and derived ones such as dose_iu), no envelope."""
    return {k: v for k, v in record.items() if k not in _ENVELOPE}


def original_fields(record: Mapping[str, Any]) -> dict[str, Any]:
    """The fields as first created: the amendments undone, newest first."""
    out = fields_of(record)
    for am in reversed(record.get("amendments") or []):
        for name, change in (am.get("changes") or {}).items():
            if name in ENVELOPE_FIELDS:
                continue
            if change.get("old") is None:
                out.pop(name, None)
            else:
                out[name] = change["old"]
    return out


def _deep(v: Any) -> Any:
    if isinstance(v, dict):
        return {k: _deep(x) for k, x in v.items()}
    if isinstance(v, list):
        return [_deep(x) for x in v]
    return v


def _copy(record: dict) -> dict:
    """A copy callers may change without touching the read cache (JSON values only)."""
    out = dict(record)
    for k, v in out.items():
        if isinstance(v, (dict, list)):
            out[k] = _deep(v)
    return out


def _content(record: Mapping[str, Any]) -> str:
    return json.dumps({k: v for k, v in record.items() if k not in _NOT_CONTENT}, sort_keys=True,
                      ensure_ascii=False, separators=(",", ":"))


@dataclass
class CheckReport:
    """What ``Store.check`` found: counts and problems (empty when all is well)."""

    counts: dict[str, dict[str, int]] = field(default_factory=dict)  # facility -> kind -> n
    partitions: int = 0
    audit_lines: int = 0
    problems: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.problems


class Store:
    """All records of one data directory. Thread-safe; safe to share with other processes."""

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
        ensure_dir(self.data_dir)
        self._flock = filelock.FileLock(str(self.data_dir / LOCK_FILE), thread_local=False)
        self._pcache = PartitionCache(cache_partitions, on_corrupt=self._corrupt)
        self._index = IndexLog(self.records_dir / INDEX_FILE, on_corrupt=self._corrupt)
        self._audit = AuditLog(self.data_dir / AUDIT_DIR, on_corrupt=self._corrupt)
        self._journal = Journal(self.records_dir / JOURNAL_FILE, self.records_dir, self.data_dir / AUDIT_DIR,
                                self._ppath)
        self.recovered: list[str] = []  # what recovering interrupted writes did (check reports it)
        with self._locked():
            self._open()

    # ---- opening, locking, corruption ------------------------------------------------

    def _corrupt(self, path: Path, err: Exception) -> StoreCorrupt:
        newest = backups.newest_backup(self.data_dir)
        if newest is not None:
            how = (f"The newest backup is {newest}. To restore it (a safety copy of the current "
                   f"files is made first) run:\n  rhledger restore {newest} --data {self.data_dir}")
        else:
            how = (f"There is no backup in {self.data_dir / backups.BACKUP_DIR}. To restore one from "
                   f"elsewhere run:\n  rhledger restore FILE --data {self.data_dir}")
        return StoreCorrupt(f"{path} does not parse ({err}). The file has been left untouched. {how}")

    @contextmanager
    def _locked(self):
        """The thread lock, then (once per thread nesting) the cross-process file lock."""
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

    def _partition_files(self) -> list[Path]:
        if not self.records_dir.is_dir():
            return []
        return sorted(p for p in self.records_dir.glob("*/*.json") if not p.name.startswith("."))

    def _open(self) -> None:
        ensure_dir(self.records_dir)
        # Temp files of a writer killed mid-write (we hold the lock: no writer is running).
        for pattern in ("*/.*.tmp", ".*.tmp", f"../{backups.BACKUP_DIR}/.*.tmp"):
            for tmp in self.records_dir.glob(pattern):
                tmp.unlink()
        meta = self._read_meta()
        self._index.refresh()
        files = self._partition_files()
        self._verify(files)
        if meta is None:
            if files or self._index.locs:
                raise self._corrupt(self.meta_path, ValueError("the schema version file is missing"))
            self._write_meta(migrate.target_version())
            return
        self._migrate(int(meta["schema"]), files)

    def _verify(self, files: list[Path]) -> None:
        """Parse every partition file changed since the last open verified it.

        ``records/.verified.json`` remembers (inode, mtime_ns, size) of each file that parsed,
        so opening a large store re-reads only what changed (our own writes replace a file,
        which always gives it a new inode). ``check`` parses everything regardless.
        """
        seen_path = self.records_dir / VERIFIED_FILE
        try:
            seen = json.loads(seen_path.read_bytes())
            if not isinstance(seen, dict):
                seen = {}
        except (FileNotFoundError, ValueError):
            seen = {}  # only a cache of earlier checks: without it every file is parsed
        now_ok = {}
        # Parsed to check, not kept (a full pass would only churn the read cache), and no
        # garbage collection meanwhile: each collection would walk the whole index again.
        with gc_paused():
            for p in files:
                rel = p.relative_to(self.records_dir).as_posix()
                key = list(file_key(p.stat()))
                if seen.get(rel) != key:
                    self._pcache.scan(p)  # StoreCorrupt names the file, the newest backup and the command
                now_ok[rel] = key
        if now_ok != seen:
            atomic_write_bytes(seen_path, json.dumps(now_ok, separators=(",", ":")).encode())

    def _mark_verified(self, paths: list[Path]) -> None:
        """Add partitions this process just wrote (from its own serialised JSON) to the open-time
        verification cache, so the next open does not parse a whole import's partitions again."""
        if not paths:
            return
        seen_path = self.records_dir / VERIFIED_FILE
        try:
            try:
                seen = json.loads(seen_path.read_bytes())
                if not isinstance(seen, dict):
                    seen = {}
            except (FileNotFoundError, ValueError):
                seen = {}
            for p in paths:
                seen[p.relative_to(self.records_dir).as_posix()] = list(file_key(p.stat()))
            atomic_write_bytes(seen_path, json.dumps(seen, separators=(",", ":")).encode())
        except OSError:
            pass  # only a cache: without it the next open parses these files, and that is all

    def _read_meta(self) -> dict | None:
        try:
            raw = self.meta_path.read_bytes()
        except FileNotFoundError:
            return None
        try:
            meta = json.loads(raw)
            int(meta["schema"])
        except (ValueError, KeyError, TypeError) as e:
            raise self._corrupt(self.meta_path, e) from None
        return meta

    def _write_meta(self, version: int) -> None:
        atomic_write_bytes(self.meta_path, json.dumps({"schema": version}).encode())

    def _migrate(self, current: int, files: list[Path]) -> None:
        target = migrate.target_version()
        migrate.check_path(current, target)
        if current == target:
            return
        self.backup(label="premigrate")
        for path in files:
            data = self._pcache.load(path) or {}
            table = data.get(TABLE, {})
            changed = False
            new_table = {}
            for doc_id, doc in table.items():
                new, ch = migrate.upgrade_record(doc, target)
                new_table[doc_id] = new
                changed = changed or ch
            if changed:
                AtomicJSONStorage(path, self._pcache).write({**data, TABLE: new_table})
        self._write_meta(target)

    # ---- small helpers ----------------------------------------------------------------

    def _now(self, now: datetime | None) -> datetime:
        if now is None:
            return datetime.now(timezone.utc)
        if now.tzinfo is None:
            raise ValueError("now must be timezone-aware")
        return now

    def _ppath(self, partition: str) -> Path:
        return self.records_dir / f"{partition}.json"

    def _refresh(self) -> None:
        self._index.refresh()

    def _get(self, rid: str) -> dict | None:
        loc = self._index.get(rid)
        if loc is None:
            return None
        hit = self._pcache.by_id(self._ppath(loc.partition)).get(rid)
        return hit[1] if hit is not None else None

    def _fetch(self, ids: Iterable[str]) -> list[dict]:
        """Records for ids (in the order given), reading each partition once."""
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
        return [_copy(found[r]) for r in ids if r in found]

    def _local_month(self, utc: str) -> str:
        return parse_utc(utc).astimezone(self.tz).strftime("%Y-%m")

    def _partition_for(self, record: dict, planned: Mapping[str, Loc] | None = None) -> str:
        """Where a new record goes; ``planned``: locations of records earlier in the same batch."""
        kind, fac = record["kind"], record["facility"]
        if kind == "stock":
            return f"{fac}/stock-{parse_utc(record['at']).astimezone(self.tz).year:04d}"
        if kind == "pregnancy":
            return f"{fac}/{record['booked_on'][:7]}"
        if record.get("pregnancy_id"):
            parent = self._index.get(record["pregnancy_id"])
            if parent is None and planned:
                parent = planned.get(record["pregnancy_id"])
            if parent is not None:
                return parent.partition  # one pregnancy and all its entries in one file
        return f"{fac}/{self._local_month(record['created_at'])}"

    def _new_loc(self, record: dict, planned: Mapping[str, Loc] | None = None) -> Loc:
        return Loc(self._partition_for(record, planned), record["kind"], record.get("woman_id"),
                   record.get("pregnancy_id"))

    def _write(self, record: dict, entry: dict) -> None:
        """Store one record and its audit line (store lock held), in the journal's order."""
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
        """Insert or replace one record in its partition (store lock held, journal written)."""
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

    @staticmethod
    def _audit_entry(action: str, record: dict, *, at: str, by: str, changes: dict,
                     reason: str | None = None) -> dict:
        entry = {"at": at, "by": by, "action": action, "id": record["id"], "kind": record["kind"],
                 "facility": record["facility"], "woman_id": record.get("woman_id"),
                 "pregnancy_id": record.get("pregnancy_id"), "version": record["version"],
                 "changes": changes}
        if reason is not None:
            entry["reason"] = reason
        if record.get("origin"):
            entry["origin"] = record["origin"]
        return entry

    @staticmethod
    def _who(by: Any, errors: dict) -> str:
        if not isinstance(by, str) or not by.strip():
            errors["by"] = "is required: the user name of who makes the change"
            return ""
        return by.strip()

    # ---- writing ----------------------------------------------------------------------

    def create(self, kind: str, raw_fields: Mapping[str, Any], *, by: str, facility: str,
               woman_id: str | None = None, pregnancy_id: str | None = None,
               record_id: str | None = None, now: datetime | None = None,
               origin: Mapping[str, Any] | None = None) -> dict:
        """Validate and store a new record; durable before it returns.

        The same ``record_id`` again with the same fields returns the stored record (a replayed
        offline submission); with different fields it raises Conflict.
        """
        now = self._now(now)
        errors: dict[str, str] = {}
        try:
            fields = validate_record(kind, raw_fields, now=now, tz=self.tz)
        except ValidationError as e:
            if e.kind is None and "kind" in e.errors:
                raise
            errors.update(e.errors)
            fields = {}
        by = self._who(by, errors)
        if not isinstance(facility, str) or not SAFE_FACILITY.match(facility):
            errors["facility"] = f"{facility!r} is not a facility id (1-32 letters, digits, '-' or '_')"
        if record_id is None:
            record_id = str(uuid.uuid4())
        elif not isinstance(record_id, str) or not SAFE_ID.match(record_id):
            errors["record_id"] = (f"{record_id!r} is not a record id: 1-64 letters, digits, '-', '_', "
                                   f"'.' or ':' (normally a UUID)")
        if origin is not None:
            origin = self._check_origin(origin, errors)
        parent = KINDS[kind].parent
        if parent in ("none", "facility") and (woman_id or pregnancy_id):
            errors["woman_id" if woman_id else "pregnancy_id"] = f"a {kind} record has no parent record"
        if parent == "woman":
            if not woman_id:
                errors["woman_id"] = "is required: the woman this pregnancy belongs to"
            if pregnancy_id:
                errors["pregnancy_id"] = "a pregnancy has no parent pregnancy"
        if parent == "pregnancy" and not pregnancy_id:
            errors["pregnancy_id"] = f"is required: the pregnancy this {KINDS[kind].label.lower()} belongs to"
        if errors:
            raise ValidationError(errors, kind)

        with self._locked():
            self._refresh()
            if parent == "woman":
                w = self._get(woman_id)
                if w is None or w["kind"] != "woman":
                    raise NotFound(f"woman {woman_id} does not exist")
            elif parent == "pregnancy":
                p = self._get(pregnancy_id)
                if p is None or p["kind"] != "pregnancy":
                    raise NotFound(f"pregnancy {pregnancy_id} does not exist")
                if woman_id and woman_id != p["woman_id"]:
                    raise ValidationError({"woman_id": f"{woman_id} is not the woman of pregnancy {pregnancy_id} "
                                                       f"({p['woman_id']})"}, kind)
                woman_id = p["woman_id"]
            existing = self._get(record_id)
            if existing is not None:
                same = (existing["kind"] == kind and existing["facility"] == facility
                        and existing.get("woman_id") == woman_id
                        and existing.get("pregnancy_id") == pregnancy_id
                        and fields in (fields_of(existing), original_fields(existing)))
                if same:
                    return _copy(existing)
                raise Conflict(f"record {record_id} already exists with different content "
                               f"(a {existing['kind']}, version {existing['version']})",
                               current_version=existing["version"])
            at = utc_text(now)
            record = {**fields, "id": record_id, "kind": kind, "facility": facility,
                      "woman_id": woman_id, "pregnancy_id": pregnancy_id,
                      "created_at": at, "created_by": by, "amended_at": None, "amended_by": None,
                      "version": 1, "amendments": [], "origin": dict(origin) if origin else None,
                      "schema": migrate.target_version(), "voided": False, "voided_reason": None}
            self._write(record, self._audit_entry("create", record, at=at, by=by,
                                                  changes={k: {"old": None, "new": v} for k, v in fields.items()}))
            return _copy(record)

    @staticmethod
    def _check_origin(origin: Any, errors: dict) -> dict | None:
        if not isinstance(origin, Mapping) or origin.get("via") not in ORIGIN_VIA:
            errors["origin"] = f"must be {{via: {' or '.join(ORIGIN_VIA)}, facility, issue}}"
            return None
        return {k: origin[k] for k in ("via", "facility", "issue") if k in origin}

    def _reason(self, reason: Any, errors: dict) -> str:
        if not isinstance(reason, str) or not reason.strip():
            errors["reason"] = "is required: say why the record is changed"
            return ""
        if len(reason.strip()) > 500:
            errors["reason"] = "is longer than 500 characters"
        return reason.strip()

    def _current_for_change(self, record_id: str, errors: dict[str, str]) -> dict:
        """The stored record an amend or void starts from (lock held); refuses a missing record
        and the envelope errors already found (who, reason)."""
        self._refresh()
        current = self._get(record_id)
        if current is None:
            raise NotFound(f"record {record_id} does not exist")
        if errors:
            raise ValidationError(errors, current["kind"])
        return current

    def amend(self, record_id: str, raw_changes: Mapping[str, Any], *, by: str, reason: str,
              expected_version: int | None = None, now: datetime | None = None) -> dict:
        """Change fields of a record; earlier values stay in ``amendments``; version + 1.

        Conflict when ``expected_version`` is given and the record has moved on. Changes that
        leave every field as it was return the record unchanged (no new version).
        """
        now = self._now(now)
        errors: dict[str, str] = {}
        by = self._who(by, errors)
        reason = self._reason(reason, errors)
        with self._locked():
            current = self._current_for_change(record_id, errors)
            kind = current["kind"]
            if expected_version is not None and expected_version != current["version"]:
                raise Conflict(f"record {record_id} was changed by someone else: it is at version "
                               f"{current['version']}, not {expected_version}; reload it and try again",
                               current_version=current["version"])
            merged = validate_record(kind, raw_changes, now=now, tz=self.tz, current=current)
            old = fields_of(current)
            changes = {k: {"old": old.get(k), "new": merged.get(k)}
                       for k in sorted(set(old) | set(merged)) if old.get(k) != merged.get(k)}
            if not changes:
                return _copy(current)
            at = utc_text(now)
            record = {**{k: v for k, v in current.items() if k in ENVELOPE_FIELDS}, **merged}
            record.update(version=current["version"] + 1, amended_at=at, amended_by=by,
                          amendments=list(current.get("amendments") or [])
                          + [{"at": at, "by": by, "reason": reason, "changes": changes}],
                          schema=migrate.target_version())
            self._write(record, self._audit_entry("amend", record, at=at, by=by, changes=changes, reason=reason))
            return _copy(record)

    def void(self, record_id: str, *, by: str, reason: str, now: datetime | None = None) -> dict:
        """Mark a record as not counting (it stays, with the reason); version + 1."""
        now = self._now(now)
        errors: dict[str, str] = {}
        by = self._who(by, errors)
        reason = self._reason(reason, errors)
        with self._locked():
            current = self._current_for_change(record_id, errors)
            if current.get("voided"):
                raise Conflict(f"record {record_id} is already voided ({current.get('voided_reason')})",
                               current_version=current["version"])
            at = utc_text(now)
            changes = {"voided": {"old": False, "new": True}, "voided_reason": {"old": None, "new": reason}}
            record = dict(current)
            record.update(voided=True, voided_reason=reason, version=current["version"] + 1,
                          amended_at=at, amended_by=by, schema=migrate.target_version(),
                          amendments=list(current.get("amendments") or [])
                          + [{"at": at, "by": by, "reason": reason, "changes": changes}])
            self._write(record, self._audit_entry("void", record, at=at, by=by, changes=changes, reason=reason))
            return _copy(record)

    def merge_foreign(self, record: Mapping[str, Any], *, by: str | None = None,
                      now: datetime | None = None) -> str:
        """Take in a record made elsewhere (card or bundle import), keeping its envelope.

        Returns "created", "updated" (the incoming copy is newer), "unchanged" (same content)
        or "kept-local" (the local copy is newer). The newer copy is the one with the higher
        (version, amended_at or created_at, content): a total order, so importing A then B
        leaves the same store as B then A.
        """
        now = self._now(now)
        incoming = self._check_foreign(record, now)
        with self._locked():
            self._refresh()
            local = self._get(incoming["id"])
            outcome, entry = self._decide(local, incoming, at=utc_text(now), by=by)
            if entry is not None:
                self._write(incoming, entry)
            return outcome

    def _decide(self, local: dict | None, incoming: dict, *, at: str, by: str | None) -> tuple[str, dict | None]:
        """merge_foreign's rule for one record: (outcome, audit entry when it is to be stored).

        May set ``incoming["origin"]`` (a local origin is kept when the import has none).
        """
        who = by or f"import:{(incoming.get('origin') or {}).get('via', 'foreign')}"
        if local is None:
            return "created", self._audit_entry(
                "import-create", incoming, at=at, by=who,
                changes={k: {"old": None, "new": v} for k, v in fields_of(incoming).items()})
        if local["kind"] != incoming["kind"]:
            raise self._kind_clash(incoming, local["kind"], local["version"])
        if _content(local) == _content(incoming):
            return "unchanged", None
        if self._rank(incoming) <= self._rank(local):
            return "kept-local", None
        old = fields_of(local)
        new = fields_of(incoming)
        changes = {k: {"old": old.get(k), "new": new.get(k)}
                   for k in sorted(set(old) | set(new)) if old.get(k) != new.get(k)}
        if local.get("origin") and not incoming.get("origin"):
            incoming["origin"] = local["origin"]
        return "updated", self._audit_entry("import-update", incoming, at=at, by=who, changes=changes)

    @staticmethod
    def _kind_clash(incoming: dict, kind: str, version: int | None) -> Conflict:
        return Conflict(f"record {incoming['id']} is a {kind} here but a {incoming['kind']} "
                        f"in the import", current_version=version)

    def merge_foreign_many(self, records: Iterable[Mapping[str, Any]], *, by: str | None = None,
                           now: datetime | None = None) -> list[str]:
        """merge_foreign for a whole import: the same outcomes and the same stored state as
        calling it on each record in order, written in one go.

        Every record is validated first: a ValidationError (its message names the record id
        and its position, ``.errors`` the fields, ``.record_id`` the id) or a kind clash
        (Conflict) and nothing is written. Then, with the lock held once: the new records'
        index lines in one append, each partition touched rewritten once (after its journal
        chunk, see ``journal``), the audit lines appended one batch per audit file. Durable
        when it returns. An interruption leaves each partition's records all in or all absent,
        each stored change with its audit line; running the same import again completes it.
        """
        now = self._now(now)
        records = list(records)
        if not records:
            return []
        with gc_paused():  # ~100,000 records of new dicts: no full collections while they pile up
            return self._merge_many(records, by=by, now=now)

    def _merge_many(self, records: list, *, by: str | None, now: datetime) -> list[str]:
        incoming: list[dict] = []
        for i, raw in enumerate(records):
            try:
                incoming.append(self._check_foreign(raw, now))
            except ValidationError as e:
                raise self._batch_error(e, raw, i, len(records)) from None
        at = utc_text(now)
        with self._locked():
            self._refresh()
            index = self._index
            # 1. Where each record goes, from the index alone: the same choice merge_foreign
            #    makes one record at a time (an entry goes with its pregnancy when that is known
            #    by then, here or earlier in the batch).
            planned: dict[str, Loc] = {}
            new_locs: list[tuple[str, Loc]] = []
            by_part: dict[str, list[int]] = {}
            for i, rec in enumerate(incoming):
                rid = rec["id"]
                loc = index.get(rid) or planned.get(rid)
                if loc is None:
                    loc = planned[rid] = self._new_loc(rec, planned)
                    new_locs.append((rid, loc))
                elif loc.kind != rec["kind"]:
                    if rid in planned:  # an earlier record of this batch has the id
                        raise self._kind_clash(rec, loc.kind, None)
                    stored = self._get(rid)
                    if stored is not None:  # the index line of a record never written does not count
                        raise self._kind_clash(rec, stored["kind"], stored["version"])
                by_part.setdefault(loc.partition, []).append(i)
            facilities = {rec["facility"] for rec in incoming}
            self._settle()
            self._journal.begin([self._audit.path_for(f, at) for f in facilities])
            if new_locs:
                index.append_many(new_locs)
            # 2. One partition at a time: decide in batch order, journal, rewrite once.
            outcomes: list[str | None] = [None] * len(incoming)
            audit_lines: dict[Path, list[tuple[int, str]]] = {}
            written: list[Path] = []
            for part, positions in by_part.items():
                if self._merge_partition(part, positions, incoming, outcomes, audit_lines, at=at, by=by):
                    written.append(self._ppath(part))
            # 3. Audit lines in the order merge_foreign would have appended them.
            for apath, lines in audit_lines.items():
                lines.sort(key=lambda t: t[0])
                append_lines(apath, [line for _, line in lines])
            self._journal.finish()
            self._mark_verified(written)
            return outcomes  # type: ignore[return-value]  # every position is in one partition

    def _merge_partition(self, part: str, positions: list[int], incoming: list[dict],
                         outcomes: list[str | None], audit_lines: dict[Path, list[tuple[int, str]]],
                         *, at: str, by: str | None) -> bool:
        """Merge the batch's records of one partition; True when it was rewritten."""
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
            outcome, entry = self._decide(local, rec, at=at, by=by)
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
            return False
        new_data = {**data, TABLE: table}
        payload = json.dumps(new_data, ensure_ascii=False, separators=(",", ":")).encode("utf-8")
        self._journal.chunk(part, chunk)
        try:
            atomic_write_bytes(path, payload)
        except BaseException:
            self._pcache.drop(path)
            raise
        self._pcache.stored(path, new_data)
        return True

    @staticmethod
    def _batch_error(e: ValidationError, raw: Any, i: int, n: int) -> ValidationError:
        rid = raw.get("id") if isinstance(raw, Mapping) else None
        err = ValidationError(e.errors, e.kind)
        err.record_id = rid
        err.position = i
        err.args = (f"record {rid!r} (number {i + 1} of {n} in the import) is not valid, nothing was "
                    f"imported: {e}",)
        return err

    @staticmethod
    def _rank(r: Mapping[str, Any]) -> tuple:
        return (int(r.get("version", 1)), r.get("amended_at") or r.get("created_at") or "", _content(r))

    def check_foreign(self, record: Mapping[str, Any], now: datetime | None = None) -> dict:
        """What merge_foreign would store for ``record`` (canonical, migrated), or ValidationError.

        Writes nothing: bundle import checks every record with it before merging any.
        """
        return self._check_foreign(record, self._now(now))

    def _check_foreign(self, record: Mapping[str, Any], now: datetime) -> dict:
        if not isinstance(record, Mapping):
            raise ValidationError({"record": "must be a JSON object"})
        rec = dict(record)
        errors: dict[str, str] = {}
        kind = rec.get("kind")
        if kind not in KINDS:
            raise ValidationError({"kind": f"{kind!r} is not a record kind; allowed: {', '.join(KINDS)}"})
        sv = rec.get("schema", 1)
        if not isinstance(sv, int) or sv < 1:
            errors["schema"] = f"{sv!r} is not a schema version (a whole number from 1)"
        else:
            try:
                rec, _ = migrate.upgrade_record(rec)
            except StoreError as e:
                errors["schema"] = str(e)
        if not isinstance(rec.get("id"), str) or not SAFE_ID.match(rec["id"]):
            errors["id"] = f"{rec.get('id')!r} is not a record id (1-64 letters, digits, '-', '_', '.', ':')"
        if not isinstance(rec.get("facility"), str) or not SAFE_FACILITY.match(rec["facility"]):
            errors["facility"] = f"{rec.get('facility')!r} is not a facility id (1-32 letters, digits, '-' or '_')"
        v = rec.get("version")
        if not isinstance(v, int) or isinstance(v, bool) or v < 1:
            errors["version"] = f"{v!r} is not a version (a whole number from 1)"
        for key in ("created_at", "amended_at"):
            val = rec.get(key)
            if val is None and key == "amended_at":
                continue
            try:
                if utc_text(parse_utc(str(val))) != val:
                    raise ValueError
            except (ValueError, TypeError):
                errors[key] = f"{val!r} is not a UTC time YYYY-MM-DDTHH:MM:SSZ"
        if not isinstance(rec.get("created_by"), str) or not rec["created_by"]:
            errors["created_by"] = "is required"
        if not isinstance(rec.get("amendments", []), list):
            errors["amendments"] = "must be a list"
        parent = KINDS[kind].parent
        for key, needed in (("woman_id", parent in ("woman", "pregnancy")), ("pregnancy_id", parent == "pregnancy")):
            val = rec.get(key)
            if needed and (not isinstance(val, str) or not SAFE_ID.match(val)):
                errors[key] = f"is required for a {kind} record"
            if not needed and val is not None:
                errors[key] = f"a {kind} record has no {key}"
        if rec.get("origin") is not None:
            rec["origin"] = self._check_origin(rec["origin"], errors)
        spec = KINDS[kind]
        names = _field_names(kind)  # a set, built once: a bulk import checks 100,000 records
        raw = {k: v for k, v in rec.items() if k not in _ENVELOPE}
        try:
            canonical = validate_record(kind, {k: v for k, v in raw.items() if k in names},
                                        now=now, tz=self.tz)
        except ValidationError as e:
            errors.update(e.errors)
            canonical = {}
        derived = set(canonical) - names
        for k in raw:
            if k not in names and k not in derived:
                errors[k] = f"is not a field of {spec.label.lower()}"
        if errors:
            raise ValidationError(errors, kind)
        out = {k: rec.get(k) for k in ENVELOPE_FIELDS}
        out.update(amendments=list(rec.get("amendments") or []), voided=bool(rec.get("voided")),
                   schema=migrate.target_version())
        out.update(canonical)
        return out

    # ---- reading ----------------------------------------------------------------------

    def get(self, record_id: str) -> dict | None:
        """One record (a copy), or None."""
        with self._tlock:
            self._refresh()
            rec = self._get(record_id)
            return _copy(rec) if rec is not None else None

    def entries(self, pregnancy_id: str) -> list[dict]:
        """Every entry of a pregnancy, voided ones included (``voided`` true), oldest first."""
        with self._tlock:
            self._refresh()
            p = self._get(pregnancy_id)
            if p is None or p["kind"] != "pregnancy":
                raise NotFound(f"pregnancy {pregnancy_id} does not exist")
            out = self._fetch(self._index.children.get(pregnancy_id, []))
        out.sort(key=lambda r: (r["created_at"], r["id"]))
        return out

    def history(self, pregnancy_id: str) -> tuple[dict, dict, list[dict]]:
        """(woman, pregnancy, entries) ready for the care engine."""
        with self._tlock:
            entries = self.entries(pregnancy_id)
            pregnancy = self.get(pregnancy_id)
            woman = self.get(pregnancy["woman_id"])
            if woman is None:
                raise NotFound(f"woman {pregnancy['woman_id']} of pregnancy {pregnancy_id} does not exist")
        return woman, pregnancy, entries

    def _ids_of(self, kind: str | None) -> list[str]:
        if kind is None:
            return list(self._index.order)
        return list(self._index.by_kind.get(kind, ()))

    def pregnancies(self, facility: str | None = None, status: str | None = None) -> list[dict]:
        """Pregnancies (creation order), optionally of one facility and/or one status."""
        with self._tlock:
            self._refresh()
            out = self._fetch(self._ids_of("pregnancy"))
        return [p for p in out if (facility is None or p["facility"] == facility)
                and (status is None or p.get("status") == status)]

    def pregnancies_of_woman(self, woman_id: str) -> list[dict]:
        """The pregnancies of one woman, oldest booking first."""
        with self._tlock:
            self._refresh()
            out = self._fetch(self._index.pregnancies_of.get(woman_id, []))
        return sorted(out, key=lambda p: (p.get("booked_on", ""), p["created_at"]))

    def women_of(self, facility: str | None = None) -> list[dict]:
        """Women registered at a facility or with a pregnancy there (all women when None)."""
        with self._tlock:
            self._refresh()
            women = self._fetch(self._ids_of("woman"))
            if facility is None:
                return women
            booked_here = {p["woman_id"] for p in self._fetch(self._ids_of("pregnancy")) if p["facility"] == facility}
        return [w for w in women if w["facility"] == facility or w["id"] in booked_here]

    def find_duplicates(self, name: str, birth_date: str | None = None, phone: str | None = None) -> list[dict]:
        """Women who may be the same person: a similar name (normalised, similarity >= 85 of 100)
        and the same birth date or the same phone digits. Best match first."""
        target = normalise_name(name)
        digits = phone_digits(phone)
        if not target or (not birth_date and not digits):
            return []
        scored = []
        for w in self.women_of():
            score = name_score(target, normalise_name(w.get("name", "")))
            if score < 85:
                continue
            if (birth_date and w.get("birth_date") == str(birth_date)[:10]) or \
                    (digits and phones_match(digits, phone_digits(w.get("phone")))):
                scored.append((score, w))
        scored.sort(key=lambda t: -t[0])
        return [w for _, w in scored]

    def search_women(self, text: str, limit: int = 50) -> list[dict]:
        """Women by register number or phone digits (exact), or name (spelling-tolerant);
        exact matches first, then the best names, at most ``limit``."""
        return search(self.women_of(), text)[:limit]

    def audit(self, record_id: str | None = None, since: str | None = None) -> list[dict]:
        """Audit lines, oldest first; ``since`` is UTC text (inclusive)."""
        with self._tlock:
            if self._journal.pending():
                with self._locked():  # settles an interrupted write (or waits for one in progress)
                    pass
            return self._audit.entries(record_id, since)

    def iter_records(self, kind: str | None = None, since: str | None = None,
                     facility: str | None = None) -> Iterator[dict]:
        """Every record (voided included), one partition at a time.

        ``since`` (UTC text, inclusive) keeps records whose max(created_at, amended_at) is at
        or after it; ``facility`` keeps records created by that facility.
        """
        with self._tlock:
            self._refresh()
            ids = self._ids_of(kind)
            locs = self._index.locs
            by_part: dict[str, list[str]] = {}
            for rid in ids:
                by_part.setdefault(locs[rid][0], []).append(rid)
        for part, rids in by_part.items():
            with self._tlock:
                data, fresh = self._pcache.scan(self._ppath(part))
            docs = (data or {}).get(TABLE, {}).values()
            table = {d["id"]: d for d in docs if isinstance(d, dict) and "id" in d}
            if fresh:  # parsed for this scan only: the caller may have these very objects
                batch = [table[r] for r in rids if r in table]
            else:
                batch = [_copy(table[r]) for r in rids if r in table]
            for rec in batch:
                if facility is not None and rec["facility"] != facility:
                    continue
                if since is not None and max(rec["created_at"], rec.get("amended_at") or "") < since:
                    continue
                yield rec

    # ---- backups ----------------------------------------------------------------------

    def backup(self, *, label: str = "backup", now: datetime | None = None) -> Path:
        """A checksummed copy of the store files in <data>/backups (keeps settings.backups_keep)."""
        with self._locked():
            return backups.make_backup(self.data_dir, label=label, keep=self.settings.backups_keep,
                                       now=now, facility=self.settings.facility_id,
                                       schema=migrate.target_version())

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
                now: datetime | None = None) -> dict:
        """Replace the store of ``data_dir`` by a backup, after verifying its checksums.

        A safety backup of the current files is made first (even when they do not parse).
        Returns {"restored": path, "safety_backup": path or None, "notes": [...]}.
        """
        data_dir = Path(data_dir)
        files, info, notes = backups.read_verified(Path(backup_file))
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
                safety = backups.make_backup(data_dir, label="prerestore", keep=keep, now=now)
            backups.install(data_dir, files)
        finally:
            lock.release()
        return {"restored": Path(backup_file), "safety_backup": safety, "info": info, "notes": notes}

    # ---- checking ---------------------------------------------------------------------

    def check(self, now: datetime | None = None) -> CheckReport:
        """Verify every partition parses, the index matches, records validate, parents exist,
        the audit log reads and holds a line for every stored record's version.

        Changes nothing, except that taking the lock settles an interrupted write first (see
        ``journal``); what that did is among the notes."""
        now = self._now(now) + timedelta(days=1)  # entries made today in a later zone are fine
        rep = CheckReport()
        with self._locked():
            self._refresh()
            seen: dict[str, tuple[str, dict]] = {}
            for path in self._partition_files():
                rep.partitions += 1
                try:
                    data = self._pcache.load(path) or {}
                except StoreCorrupt as e:
                    rep.problems.append(str(e).split(". The file")[0])
                    continue
                part = path.relative_to(self.records_dir).with_suffix("").as_posix()
                for doc in data.get(TABLE, {}).values():
                    rid = doc.get("id")
                    if rid in seen:
                        rep.problems.append(f"record {rid} is stored twice ({seen[rid][0]} and {part})")
                    seen[rid] = (part, doc)
            for rid, (partition, *_rest) in self._index.locs.items():
                if rid not in seen:
                    rep.notes.append(f"index line for {rid} points at {partition}, which does not hold it "
                                     f"(an interrupted write; harmless)")
                elif seen[rid][0] != partition:
                    rep.problems.append(f"record {rid} is in {seen[rid][0]} but the index says {partition}")
            for rid, (part, rec) in seen.items():
                if rid not in self._index.locs:
                    rep.problems.append(f"record {rid} in {part} is missing from the index")
                kind = rec.get("kind")
                fac = rec.get("facility", "?")
                rep.counts.setdefault(fac, {}).setdefault(kind, 0)
                rep.counts[fac][kind] += 1
                if kind not in KINDS:
                    rep.problems.append(f"record {rid} in {part} has unknown kind {kind!r}")
                    continue
                spec = KINDS[kind]
                try:
                    validate_record(kind, {k: v for k, v in rec.items() if k in spec.field_names},
                                    now=now, tz=self.tz)
                except ValidationError as e:
                    rep.problems.append(f"record {rid} ({kind}, {part}) does not validate: {e}")
                for key, want in (("woman_id", "woman"), ("pregnancy_id", "pregnancy")):
                    needed = (spec.parent in ("woman", "pregnancy")) if want == "woman" else spec.parent == "pregnancy"
                    if not needed:
                        continue
                    ref = rec.get(key)
                    if ref not in seen or seen[ref][1].get("kind") != want:
                        origin = " (imported)" if rec.get("origin") else ""
                        rep.problems.append(f"record {rid} ({kind}){origin}: its {want} {ref} does not exist")
            audited: set[tuple[str, int]] = set()
            for path in self._audit.files():
                try:
                    for entry in self._audit.read(path):
                        rep.audit_lines += 1
                        audited.add((entry.get("id"), entry.get("version")))
                except StoreCorrupt as e:
                    rep.problems.append(str(e).split(". The file")[0])
            for rid, (part, rec) in seen.items():
                if (rid, rec.get("version")) not in audited:
                    rep.problems.append(f"record {rid} ({rec.get('kind')}, {part}) version {rec.get('version')} "
                                        f"has no audit line")
            rep.notes += self.recovered
        return rep
