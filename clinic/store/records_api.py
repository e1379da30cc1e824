"""The record API: create, amend and void (validated, durable before they return) and every
read (one record, a pregnancy's entries, women, search, audit lines, a full scan).

Reads hand out copies: a caller may change what it gets without touching the read cache.
"""
from __future__ import annotations

import uuid
from dataclasses import dataclass
from datetime import datetime
from typing import Any, Iterator, Mapping

from clinic.records import envelope
from clinic.records.envelope import fields_of, original_fields
from clinic.records.schema import ENVELOPE_FIELDS, KINDS
from clinic.records.validate import ValidationError, validate_record
from clinic.records.values import utc_text
from clinic.store import migrate
from clinic.store.audit import audit_entry
from clinic.store.errors import Conflict, NotFound
from clinic.store.layout import partition_files
from clinic.store.search import name_score, normalise_name, phone_digits, phones_match, search
from clinic.store.storage import TABLE, file_key
from clinic.store.writer import Writer, copy_record


def _change_time(current: Mapping[str, Any], now: datetime) -> str:
    """When an amendment or void is recorded: now, but never before the record's own times (a
    clock that runs behind must not date a change before what it changes)."""
    return max(utc_text(now), current.get("created_at") or "", current.get("amended_at") or "")


@dataclass(frozen=True)
class Created:
    """What ``Store.create`` did: ``record`` as stored, and ``created`` False when this id was
    stored before with the same fields (a replayed offline submission: nothing was written)."""

    record: dict
    created: bool


class RecordsAPI(Writer):
    """Creating, changing and reading records (part of ``Store``)."""

    # ---- writing ----------------------------------------------------------------------

    def create(self, kind: str, raw_fields: Mapping[str, Any], *, by: str, facility: str,
               woman_id: str | None = None, pregnancy_id: str | None = None,
               record_id: str | None = None, now: datetime | None = None,
               origin: Mapping[str, Any] | None = None) -> Created:
        """Validate and store a new record; durable before it returns.

        The same ``record_id`` again with the same fields returns the stored record with
        ``created`` False (a replayed offline submission); with different fields it raises
        Conflict.
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
        by = envelope.check_by(by, errors)
        envelope.check_facility(facility, errors)
        if record_id is None:
            record_id = str(uuid.uuid4())
        else:
            envelope.check_record_id(record_id, errors)
        if origin is not None:
            origin = envelope.check_origin(origin, errors)
        envelope.check_parents(kind, woman_id, pregnancy_id, errors)
        if errors:
            raise ValidationError(errors, kind)

        parent = KINDS[kind].parent
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
                    return Created(copy_record(existing), created=False)
                raise Conflict(f"record {record_id} already exists with different content "
                               f"(a {existing['kind']}, version {existing['version']})",
                               current_version=existing["version"])
            at = utc_text(now)
            record = {**fields, "id": record_id, "kind": kind, "facility": facility,
                      "woman_id": woman_id, "pregnancy_id": pregnancy_id,
                      "created_at": at, "created_by": by, "amended_at": None, "amended_by": None,
                      "version": 1, "amendments": [], "origin": dict(origin) if origin else None,
                      "schema": migrate.target_version(), "voided": False, "voided_reason": None}
            self._write(record, audit_entry("create", record, at=at, by=by,
                                            changes={k: {"old": None, "new": v} for k, v in fields.items()}))
            return Created(copy_record(record), created=True)

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
        by = envelope.check_by(by, errors)
        reason = envelope.check_reason(reason, errors)
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
                return copy_record(current)
            at = _change_time(current, now)
            record = {**{k: v for k, v in current.items() if k in ENVELOPE_FIELDS}, **merged}
            record.update(version=current["version"] + 1, amended_at=at, amended_by=by,
                          amendments=list(current.get("amendments") or [])
                          + [{"at": at, "by": by, "reason": reason, "changes": changes}],
                          schema=migrate.target_version())
            self._write(record, audit_entry("amend", record, at=at, by=by, changes=changes, reason=reason))
            return copy_record(record)

    def void(self, record_id: str, *, by: str, reason: str, now: datetime | None = None) -> dict:
        """Mark a record as not counting (it stays, with the reason); version + 1."""
        now = self._now(now)
        errors: dict[str, str] = {}
        by = envelope.check_by(by, errors)
        reason = envelope.check_reason(reason, errors)
        with self._locked():
            current = self._current_for_change(record_id, errors)
            if current.get("voided"):
                raise Conflict(f"record {record_id} is already voided ({current.get('voided_reason')})",
                               current_version=current["version"])
            at = _change_time(current, now)
            changes = {"voided": {"old": False, "new": True}, "voided_reason": {"old": None, "new": reason}}
            record = dict(current)
            record.update(voided=True, voided_reason=reason, version=current["version"] + 1,
                          amended_at=at, amended_by=by, schema=migrate.target_version(),
                          amendments=list(current.get("amendments") or [])
                          + [{"at": at, "by": by, "reason": reason, "changes": changes}])
            self._write(record, audit_entry("void", record, at=at, by=by, changes=changes, reason=reason))
            return copy_record(record)

    # ---- reading ----------------------------------------------------------------------

    def get(self, record_id: str) -> dict | None:
        """One record (a copy), or None."""
        with self._tlock:
            self._refresh()
            rec = self._get(record_id)
            return copy_record(rec) if rec is not None else None

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

    def partition_keys(self) -> dict[str, tuple[int, int, int]]:
        """Every partition file (``<facility>/<name>``) with its key (inode, mtime_ns, size). A
        partition whose key is unchanged holds the same records: every write replaces the file."""
        out = {}
        for p in partition_files(self.records_dir):
            try:
                out[p.relative_to(self.records_dir).with_suffix("").as_posix()] = file_key(p.stat())
            except FileNotFoundError:
                continue
        return out

    def partition_records(self, partition: str) -> tuple[tuple[int, int, int] | None, list[dict]]:
        """(key, records) of one partition, read together: the records are those of that file version.
        Hand-outs are the caller's (copies when the read cache holds them)."""
        with self._tlock:
            key, data, fresh = self._pcache.scan_keyed(self._ppath(partition))
        docs = [d for d in (data or {}).get(TABLE, {}).values() if isinstance(d, dict) and "id" in d]
        return key, (docs if fresh else [copy_record(d) for d in docs])

    def latest_change(self) -> str | None:
        """UTC text of the latest change recorded here (create, amend, void, import), by the clock
        that recorded it; None for an empty store. A clock now behind it has been set back."""
        with self._tlock:
            return self._audit.latest_at()

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
                batch = [copy_record(table[r]) for r in rids if r in table]
            for rec in batch:
                if facility is not None and rec["facility"] != facility:
                    continue
                if since is not None and max(rec["created_at"], rec.get("amended_at") or "") < since:
                    continue
                yield rec
