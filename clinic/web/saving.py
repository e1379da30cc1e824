"""Creating records from the API and from the HTML fallback forms, one code path for both.

``create_record`` and ``save_booking`` raise ``ValidationError`` (field -> message),
``Duplicates`` (a similar woman exists and the booking did not confirm she is another),
or the store's ``Conflict``. A booking validates every part before storing any.
"""
from __future__ import annotations

import uuid

from clinic.care.codes import AlertCode
from clinic.records.schema import KINDS
from clinic.records.validate import ValidationError, validate_record
from clinic.records.values import utc_text
from clinic.store import Created
from clinic.web.db import get_settings, get_store, utcnow

BOOKING_PARTS = ("woman", "pregnancy", "typing", "partner_typing", "screen")
OPTIONAL_PARTS = ("typing", "partner_typing", "screen")


class Duplicates(Exception):
    """Women already on record who may be the woman being booked."""

    def __init__(self, women):
        self.women = list(women)
        super().__init__(f"{len(self.women)} similar women on record")


def check_id(value, field: str = "id") -> str:
    """A record id from a client: a UUID (made on the phone); a new one when absent."""
    if value in (None, ""):
        return str(uuid.uuid4())
    try:
        return str(uuid.UUID(str(value)))
    except ValueError:
        raise ValidationError({field: f"{value!r} is not a UUID such as 3f2b…-…"}) from None


def redirect_for(record: dict) -> str:
    from flask import url_for

    kind = record["kind"]
    if kind == "woman":
        return url_for("records.woman", woman_id=record["id"])
    if kind == "pregnancy":
        return url_for("records.pregnancy", pregnancy_id=record["id"])
    if kind == "stock":
        return url_for("records.stock")
    return url_for("records.pregnancy", pregnancy_id=record["pregnancy_id"]) + f"#r-{record['id']}"


def resolve_parents(kind: str, woman_id, pregnancy_id) -> tuple[str | None, str | None]:
    """Check the parents a record of ``kind`` hangs from; 'field: message' errors otherwise."""
    if kind not in KINDS:
        raise ValidationError({"kind": f"{kind!r} is not a record kind; allowed: {', '.join(KINDS)}"})
    parent = KINDS[kind].parent
    store = get_store()
    if parent in ("none", "facility"):
        return None, None
    if parent == "woman":
        w = store.get(woman_id) if woman_id else None
        if not w or w.get("kind") != "woman":
            raise ValidationError({"woman_id": f"no woman with id {woman_id!r} on record"})
        return w["id"], None
    p = store.get(pregnancy_id) if pregnancy_id else None
    if not p or p.get("kind") != "pregnancy":
        raise ValidationError({"pregnancy_id": f"no pregnancy with id {pregnancy_id!r} on record"})
    if woman_id and woman_id != p["woman_id"]:
        raise ValidationError({"woman_id": "is not the woman of this pregnancy"})
    return p["woman_id"], p["id"]


def create_record(kind: str, fields: dict, user, *, record_id=None, woman_id=None,
                  pregnancy_id=None) -> Created:
    """Store one record. ``created`` is False for a replay (this id was stored before)."""
    if not isinstance(fields, dict):
        raise ValidationError({"fields": "must be an object of field: value"})
    rid = check_id(record_id)
    woman_id, pregnancy_id = resolve_parents(kind, woman_id, pregnancy_id)
    store = get_store()
    if kind == "dose" and store.get(rid) is None:  # a replay was judged when it was first stored
        clean = validate_record(kind, fields, now=utcnow(), tz=get_settings().tz)
        check_departure({**clean, "id": rid, "kind": kind, "woman_id": woman_id, "pregnancy_id": pregnancy_id,
                         "facility": get_settings().facility_id, "created_at": utc_text(utcnow()), "version": 1},
                        user)
    return store.create(kind, fields, by=user.username, facility=get_settings().facility_id,
                        woman_id=woman_id, pregnancy_id=pregnancy_id, record_id=rid, now=utcnow())


# Alerts of the care engine saying that a recorded dose departs from the plan. Recording such
# a dose overrides the plan's suggestion: a clinician's decision, with the reason written down.
DEPARTURE_ALERTS = (AlertCode.DOSE_ABOVE_ALLOWED, AlertCode.DOSE_RHD_POSITIVE, AlertCode.DOSE_AFTER_SENSITISATION)


def departures(candidate: dict) -> list[str]:
    """What the care engine says against this dose record (not yet stored), if anything."""
    from clinic.care.errors import CareError
    from clinic.web.db import plan_for

    pid = candidate.get("pregnancy_id")
    if not pid:
        return []
    woman, preg, entries = get_store().history(pid)
    entries = [e for e in entries if e.get("id") != candidate["id"]] + [candidate]
    try:
        plan = plan_for(pid, (woman, preg, entries))
    except CareError:
        return []  # the record page shows why no plan can be made; nothing to judge against
    return [a.message for a in plan.alerts if a.code in DEPARTURE_ALERTS and candidate["id"] in a.record_ids]


def check_departure(candidate: dict, user) -> None:
    """A dose against the plan needs the override permission and a reason (else 422 on the field)."""
    from clinic.accounts import roles

    said = departures(candidate)
    if not said:
        return
    if not roles.may(user.role, roles.OVERRIDE):
        raise ValidationError({"override_reason": f"{said[0]}. Only a clinician may record a dose the plan does "
                                                  f"not support, with the reason; check the dose or ask one"})
    if not str(candidate.get("override_reason") or "").strip():
        raise ValidationError({"override_reason": f"is required: {said[0]}; say why this dose is given"})


def check_dose_amendment(record: dict, changes: dict, user) -> None:
    """The same rule when a dose is amended (the amended record is judged)."""
    if record.get("kind") != "dose" or changes == {"voided": True}:
        return
    merged = validate_record("dose", changes, now=utcnow(), tz=get_settings().tz, current=record)
    envelope = {k: record.get(k) for k in ("id", "kind", "woman_id", "pregnancy_id", "facility", "created_at",
                                           "version")}
    check_departure({**envelope, **merged}, user)


def _validate_part(name: str, fields, errors: dict, now, tz) -> dict:
    if not isinstance(fields, dict):
        errors[name] = "must be an object of field: value"
        return {}
    try:
        return validate_record(name, fields, now=now, tz=tz)
    except ValidationError as e:
        for k, v in e.errors.items():
            errors[f"{name}.{k}"] = v
        return {}


def save_booking(body: dict, user) -> dict:
    """Woman (new, or an existing one by id), pregnancy, and optional typing, partner's typing
    and booking screen. Every part is validated first; nothing is stored unless all pass.
    Errors are keyed ``part.field``. Returns {part: record} and ``replay``."""
    store, s = get_store(), get_settings()
    now, tz = utcnow(), s.tz
    errors: dict[str, str] = {}
    parts: dict[str, dict] = {}
    for name in BOOKING_PARTS:
        part = body.get(name)
        if part in (None, {}):
            if name in ("woman", "pregnancy"):
                errors[name] = "is required"
            continue
        if not isinstance(part, dict):
            errors[name] = "must be an object {id, fields}"
            continue
        try:
            pid = check_id(part.get("id"), f"{name}.id")
        except ValidationError as e:
            errors.update(e.errors)
            continue
        parts[name] = {"id": pid, "fields": part.get("fields")}
    existing_woman = None
    w = parts.get("woman")
    if w and w["fields"] in (None, {}):
        existing_woman = store.get(w["id"])
        if not existing_woman or existing_woman.get("kind") != "woman":
            errors["woman.id"] = f"no woman with id {w['id']!r} on record; give her fields to register her"
    for name, part in parts.items():
        if name == "woman" and existing_woman is not None:
            continue
        if name in OPTIONAL_PARTS and not any(v not in (None, "", []) for v in (part["fields"] or {}).values()):
            continue
        part["clean"] = _validate_part(name, part["fields"], errors, now, tz)
    if errors:
        raise ValidationError(errors, "booking")
    # A stored id with other content is a conflict; check all before writing any.
    from clinic.store import Conflict

    all_stored = True  # every part was stored before: a replay, no duplicate check
    for name, part in parts.items():
        if "clean" not in part:
            continue
        old = store.get(part["id"])
        if old is None:
            all_stored = False
        elif old.get("kind") != name:
            raise Conflict(f"id {part['id']} is already a {old.get('kind')} record")
    if not all_stored and existing_woman is None and store.get(parts["woman"]["id"]) is None \
            and not body.get("confirm_not_duplicate"):
        wf = parts["woman"]["clean"]
        dups = [d for d in store.find_duplicates(wf["name"], birth_date=wf.get("birth_date"),
                                                 phone=wf.get("phone")) if d.get("id") != parts["woman"]["id"]]
        if dups:
            raise Duplicates(dups)
    out: dict[str, dict] = {}
    created = False
    if existing_woman is not None:
        out["woman"] = existing_woman
    woman_id = parts["woman"]["id"]
    preg_id = parts["pregnancy"]["id"]
    for name in BOOKING_PARTS:
        part = parts.get(name)
        if not part or "clean" not in part:
            continue
        kw = {}
        if name == "pregnancy":
            kw = {"woman_id": woman_id}
        elif name != "woman":
            kw = {"woman_id": woman_id, "pregnancy_id": preg_id}
        res = store.create(name, part["fields"], by=user.username, facility=s.facility_id,
                           record_id=part["id"], now=now, **kw)
        out[name] = res.record
        created = created or res.created
    return {"records": out, "replay": not created}
