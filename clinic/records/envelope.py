"""Checks of a record's envelope (``schema.ENVELOPE_FIELDS``): who made or changed it, where,
its id and parents, version, times, origin and schema number.

``validate_record`` checks a kind's fields; this module checks what the store wraps them in.
The store calls these when it creates a record (``check_by`` ... ``check_parents``) and when
it takes in a record made elsewhere (``check_kind``, ``check_schema_number`` then
``foreign_record``). Every check adds ``field: message`` to an ``errors`` dict, so one
ValidationError names every bad field at once. Nothing here touches storage.
"""
from __future__ import annotations

import functools
import re
from datetime import datetime, tzinfo
from typing import Any, Mapping

from clinic.records.schema import ENVELOPE_FIELDS, KINDS
from clinic.records.validate import ValidationError, validate_record
from clinic.records.values import parse_utc, utc_text

SAFE_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.:-]{0,63}$")
SAFE_FACILITY = re.compile(r"^[A-Za-z0-9_-]{1,32}$")
ORIGIN_VIA = ("card", "bundle")
REASON_MAX = 500

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


# ---- a record made here --------------------------------------------------------------

def check_by(by: Any, errors: dict[str, str]) -> str:
    """The user name of who makes a change, stripped."""
    if not isinstance(by, str) or not by.strip():
        errors["by"] = "is required: the user name of who makes the change"
        return ""
    return by.strip()


def check_reason(reason: Any, errors: dict[str, str]) -> str:
    """Why a record is amended or voided, stripped."""
    if not isinstance(reason, str) or not reason.strip():
        errors["reason"] = "is required: say why the record is changed"
        return ""
    if len(reason.strip()) > REASON_MAX:
        errors["reason"] = f"is longer than {REASON_MAX} characters"
    return reason.strip()


def check_facility(facility: Any, errors: dict[str, str]) -> None:
    if not isinstance(facility, str) or not SAFE_FACILITY.match(facility):
        errors["facility"] = f"{facility!r} is not a facility id (1-32 letters, digits, '-' or '_')"


def check_record_id(record_id: Any, errors: dict[str, str]) -> None:
    if not isinstance(record_id, str) or not SAFE_ID.match(record_id):
        errors["record_id"] = (f"{record_id!r} is not a record id: 1-64 letters, digits, '-', '_', "
                               f"'.' or ':' (normally a UUID)")


def check_origin(origin: Any, errors: dict[str, str]) -> dict | None:
    """Where a record made elsewhere came from: {via, facility, issue} (other keys dropped)."""
    if not isinstance(origin, Mapping) or origin.get("via") not in ORIGIN_VIA:
        errors["origin"] = f"must be {{via: {' or '.join(ORIGIN_VIA)}, facility, issue}}"
        return None
    return {k: origin[k] for k in ("via", "facility", "issue") if k in origin}


def check_parents(kind: str, woman_id: str | None, pregnancy_id: str | None, errors: dict[str, str]) -> None:
    """The parent ids a new record of ``kind`` must (or must not) name; whether they exist is
    the store's to say."""
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


# ---- a record made elsewhere (card or bundle import) -----------------------------------

def check_kind(record: Mapping[str, Any]) -> str:
    """The record's kind; ValidationError at once when it is not one (nothing else can be checked)."""
    kind = record.get("kind")
    if kind not in KINDS:
        raise ValidationError({"kind": f"{kind!r} is not a record kind; allowed: {', '.join(KINDS)}"})
    return kind


def check_schema_number(value: Any, errors: dict[str, str]) -> bool:
    """True when ``value`` is a schema version the store may try to upgrade from."""
    if not isinstance(value, int) or value < 1:
        errors["schema"] = f"{value!r} is not a schema version (a whole number from 1)"
        return False
    return True


def _check_stored_envelope(rec: dict, kind: str, errors: dict[str, str]) -> None:
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
        rec["origin"] = check_origin(rec["origin"], errors)


def foreign_record(rec: dict, kind: str, errors: dict[str, str], *, now: datetime, tz: tzinfo,
                   schema: int) -> dict:
    """A record made elsewhere, already at ``schema``, in the shape the store keeps it: its
    envelope checked, its fields validated (canonical), a field its kind does not have refused.

    ``errors`` holds what the caller found before (kind, schema); ValidationError names them
    and every error found here. May set ``rec["origin"]`` to its checked form.
    """
    _check_stored_envelope(rec, kind, errors)
    spec = KINDS[kind]
    names = _field_names(kind)  # a set, built once: a bulk import checks 100,000 records
    raw = {k: v for k, v in rec.items() if k not in _ENVELOPE}
    try:
        canonical = validate_record(kind, {k: v for k, v in raw.items() if k in names}, now=now, tz=tz)
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
    out.update(amendments=list(rec.get("amendments") or []), voided=bool(rec.get("voided")), schema=schema)
    out.update(canonical)
    return out
