"""Import and merge: taking in records made elsewhere (card or bundle import), one at a time
(``merge_foreign``) or a whole import in one write (``merge_foreign_many``), and the check
both run first (``check_foreign``).

The rule for one record: absent here, it is created; the same content is unchanged; else the
newer copy wins, the one with the higher (version, amended_at or created_at, content). That is
a total order, so importing A then B leaves the same store as B then A.

Ownership (``signer``: the facility whose key signed the card or bundle). A record belongs
to the facility that made it (its ``facility``), and a signature vouches only for the
signer's own records. A copy of another facility's record that differs from the one here
never replaces it (nor voids it): the outcome is ``not-owner``, nothing is stored, and an
``import-declined`` audit line keeps what the signer sent (every changed field, attributed to
the signer), so nothing it carried vanishes unrecorded. A copy of another facility's record
that is not here yet is taken in (a card carries the whole history); the owner's own signed
copy later replaces such a carried copy whenever the two differ.
"""
from __future__ import annotations

import json
from datetime import datetime
from typing import Any, Iterable, Mapping

from clinic.records import envelope
from clinic.records.envelope import fields_of
from clinic.records.validate import ValidationError
from clinic.records.values import utc_text
from clinic.store import migrate
from clinic.store.audit import audit_entry
from clinic.store.errors import Conflict, StoreError
from clinic.store.index import Loc
from clinic.store.storage import append_lines, gc_paused
from clinic.store.writer import Writer

# Left out when deciding whether two copies of a record hold the same content.
_NOT_CONTENT = ("origin", "schema")


def _content(record: Mapping[str, Any]) -> str:
    return json.dumps({k: v for k, v in record.items() if k not in _NOT_CONTENT}, sort_keys=True,
                      ensure_ascii=False, separators=(",", ":"))


def _rank(r: Mapping[str, Any]) -> tuple:
    return (int(r.get("version", 1)), r.get("amended_at") or r.get("created_at") or "", _content(r))


def _kind_clash(incoming: dict, kind: str, version: int | None) -> Conflict:
    return Conflict(f"record {incoming['id']} is a {kind} here but a {incoming['kind']} "
                    f"in the import", current_version=version)


NOT_OWNER = "not-owner"
# The changes of the envelope an import-declined line shows beside the fields.
_DECLINED_ENVELOPE = ("version", "voided", "voided_reason", "amended_at", "woman_id", "pregnancy_id")


def vouched_by(record: Mapping[str, Any]) -> str:
    """The facility whose signature stands behind a stored copy: the card's or bundle's signer
    it came with (``origin.facility``), else the facility that made it here."""
    return (record.get("origin") or {}).get("facility") or record["facility"]


def _changes(local: Mapping[str, Any], incoming: Mapping[str, Any], extra: tuple[str, ...] = ()) -> dict:
    old = {**fields_of(local), **{k: local.get(k) for k in extra}}
    new = {**fields_of(incoming), **{k: incoming.get(k) for k in extra}}
    return {k: {"old": old.get(k), "new": new.get(k)}
            for k in sorted(set(old) | set(new)) if old.get(k) != new.get(k)}


def _declined(local: dict, incoming: dict, signer: str, *, at: str, by: str) -> dict:
    """The audit line of a copy that was not taken in: the owner's record as it stays, and
    what the signer's copy would have changed (attributed to the signer)."""
    entry = audit_entry("import-declined", local, at=at, by=by,
                        changes=_changes(local, incoming, _DECLINED_ENVELOPE),
                        reason=f"signed by {signer}, which does not own this record of {local['facility']}: "
                               f"{local['facility']}'s copy is kept unchanged")
    entry["signer"] = signer
    entry["declined_version"] = incoming.get("version")
    return entry


def _decide(local: dict | None, incoming: dict, *, at: str, by: str | None, signer: str | None = None,
            declined: list[dict] | None = None) -> tuple[str, dict | None]:
    """The rule for one record: (outcome, audit entry when it is to be stored).

    ``signer``: the facility that signed the import (None: the caller vouches, no ownership
    rule). A ``not-owner`` outcome adds its audit line to ``declined`` (nothing is stored).
    May set ``incoming["origin"]`` (a local origin is kept when the import has none).
    """
    who = by or f"import:{(incoming.get('origin') or {}).get('via', 'foreign')}"
    if local is None:
        return "created", audit_entry(
            "import-create", incoming, at=at, by=who,
            changes={k: {"old": None, "new": v} for k, v in fields_of(incoming).items()})
    if local["kind"] != incoming["kind"]:
        raise _kind_clash(incoming, local["kind"], local["version"])
    if _content(local) == _content(incoming):
        return "unchanged", None
    owner = local["facility"]
    if signer is not None and (signer != owner or incoming["facility"] != owner):
        if declined is not None:
            declined.append(_declined(local, incoming, signer, at=at, by=who))
        return NOT_OWNER, None
    if signer is not None and vouched_by(local) != owner:
        pass  # the owner's own copy replaces one that another facility carried here
    elif _rank(incoming) <= _rank(local):
        return "kept-local", None
    if local.get("origin") and not incoming.get("origin"):
        incoming["origin"] = local["origin"]
    return "updated", audit_entry("import-update", incoming, at=at, by=who, changes=_changes(local, incoming))


def _batch_error(e: ValidationError, raw: Any, i: int, n: int) -> ValidationError:
    rid = raw.get("id") if isinstance(raw, Mapping) else None
    err = ValidationError(e.errors, e.kind)
    err.record_id = rid
    err.position = i
    err.args = (f"record {rid!r} (number {i + 1} of {n} in the import) is not valid, nothing was "
                f"imported: {e}",)
    return err


class Merging(Writer):
    """Importing records made elsewhere (part of ``Store``)."""

    def merge_foreign(self, record: Mapping[str, Any], *, by: str | None = None,
                      now: datetime | None = None, signer: str | None = None) -> str:
        """Take in a record made elsewhere (card or bundle import), keeping its envelope.

        Returns "created", "updated" (the incoming copy is newer), "unchanged" (same content),
        "kept-local" (the local copy is newer) or "not-owner" (``signer`` does not own the
        record, which stays as it is); the rules are in the module docstring.
        """
        now = self._now(now)
        incoming = self._check_foreign(record, now)
        with self._locked():
            self._refresh()
            local = self._get(incoming["id"])
            declined: list[dict] = []
            outcome, entry = _decide(local, incoming, at=utc_text(now), by=by, signer=signer, declined=declined)
            if entry is not None:
                self._write(incoming, entry)
            self._append_declined(declined)
            return outcome

    def _append_declined(self, declined: list[dict]) -> None:
        """The audit lines of copies not taken in (store lock held). They describe no stored
        change, so they go outside the journal, after the write."""
        by_path: dict = {}
        for entry in declined:
            by_path.setdefault(self._audit.path_for(entry["facility"], entry["at"]), []).append(
                self._audit.line(entry))
        for path, lines in by_path.items():
            append_lines(path, lines)

    def merge_foreign_many(self, records: Iterable[Mapping[str, Any]], *, by: str | None = None,
                           now: datetime | None = None, signer: str | None = None) -> list[str]:
        """merge_foreign for a whole import: the same outcomes and the same stored state as
        calling it on each record in order, written in one go.

        Every record is validated first: a ValidationError (its message names the record id
        and its position, ``.errors`` the fields, ``.record_id`` the id) or a kind clash
        (Conflict) and nothing is written. Then, with the lock held once: the new records'
        index lines in one append, each partition touched rewritten once (after its journal
        chunk, see ``journal``), the audit lines appended one batch per audit file. Durable
        when it returns. An interruption leaves each partition's records all in or all absent,
        each stored change with its audit line; running the same import again completes it.
        ``signer``: as for merge_foreign.
        """
        now = self._now(now)
        records = list(records)
        if not records:
            return []
        with gc_paused():  # ~100,000 records of new dicts: no full collections while they pile up
            return self._merge_many(records, by=by, now=now, signer=signer)

    def _merge_many(self, records: list, *, by: str | None, now: datetime, signer: str | None) -> list[str]:
        incoming: list[dict] = []
        for i, raw in enumerate(records):
            try:
                incoming.append(self._check_foreign(raw, now))
            except ValidationError as e:
                raise _batch_error(e, raw, i, len(records)) from None
        at = utc_text(now)
        with self._locked():
            self._refresh()
            index = self._index
            # Where each record goes, from the index alone: the same choice merge_foreign makes
            # one record at a time (an entry goes with its pregnancy when that is known by
            # then, here or earlier in the batch).
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
                        raise _kind_clash(rec, loc.kind, None)
                    stored = self._get(rid)
                    if stored is not None:  # the index line of a record never written does not count
                        raise _kind_clash(rec, stored["kind"], stored["version"])
                by_part.setdefault(loc.partition, []).append(i)
            declined: list[dict] = []
            outcomes = self._write_batch(
                incoming, by_part, new_locs,
                lambda local, rec: _decide(local, rec, at=at, by=by, signer=signer, declined=declined), at=at)
            self._append_declined(declined)
            return outcomes

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
        kind = envelope.check_kind(rec)
        if envelope.check_schema_number(rec.get("schema", 1), errors):
            try:
                rec, _ = migrate.upgrade_record(rec)
            except StoreError as e:
                errors["schema"] = str(e)
        return envelope.foreign_record(rec, kind, errors, now=now, tz=self.tz, schema=migrate.target_version())
