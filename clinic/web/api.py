"""The JSON API under /api/v1 (described in openapi.yaml; a test keeps the two in step).

Writes need a session and the X-CSRF-Token header. Errors: 401 not signed in, 403 role or
CSRF token, 404 unknown id, 409 conflict, 422 {errors: {field: message}}.
"""
from __future__ import annotations

import dataclasses
from datetime import date, datetime
from pathlib import Path

from flask import Blueprint, Response, jsonify, request, url_for

from clinic.records.validate import ValidationError
from clinic.records.values import utc_text
from clinic.web import calcs, worklist
from clinic.web.auth import csrf_token, current_user, require_kind
from clinic.web.clock import clock_warnings
from clinic.web.db import get_settings, get_store, plan_for, utcnow
from clinic.web.saving import Duplicates, check_dose_amendment, create_record, redirect_for, save_booking

bp = Blueprint("api", __name__, url_prefix="/api/v1")
OPENAPI_FILE = Path(__file__).with_name("openapi.yaml")


def jsonable(obj):
    """Plans, items and records as JSON values (aware datetimes as UTC text)."""
    if hasattr(obj, "to_dict"):
        return jsonable(obj.to_dict())
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return jsonable(dataclasses.asdict(obj))
    if isinstance(obj, datetime):
        return utc_text(obj) if obj.tzinfo else obj.isoformat()
    if isinstance(obj, date):
        return obj.isoformat()
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple, set)):
        return [jsonable(v) for v in obj]
    return obj


class BadBody(Exception):
    """A request body that is not text this API can take (answered 400)."""


def _broken_text(v, where: str = "body") -> str | None:
    """Where a lone UTF-16 surrogate (a "\\ud800" escape in JSON) hides in a parsed body, if anywhere:
    it cannot be stored, shown or printed."""
    if isinstance(v, str):
        return where if any(0xD800 <= ord(c) <= 0xDFFF for c in v) else None
    if isinstance(v, dict):
        for k, x in v.items():
            hit = _broken_text(k, where) or _broken_text(x, f"{where}.{k}" if where != "body" else str(k))
            if hit:
                return hit
    if isinstance(v, list):
        for i, x in enumerate(v):
            hit = _broken_text(x, f"{where}[{i}]")
            if hit:
                return hit
    return None


def _body() -> dict:
    body = request.get_json(silent=True)
    if not isinstance(body, dict):
        raise ValidationError({"body": "send a JSON object (Content-Type: application/json)"})
    where = _broken_text(body)
    if where:
        raise BadBody(f"{where}: holds a broken character (a lone UTF-16 surrogate such as \\ud800), which "
                      f"cannot be stored; send the text as UTF-8")
    return body


@bp.errorhandler(BadBody)
def _bad_body(e):
    return jsonify(error=str(e)), 400


def _unprocessable(e: ValidationError):
    return jsonify(errors=e.errors), 422


def _conflict(e, record_id=None):
    current = getattr(e, "current_version", None)
    if current is None and record_id:
        rec = get_store().get(record_id)
        current = rec.get("version") if rec else None
    return jsonify(error=str(e) or "conflict", current_version=current), 409


@bp.get("/session")
def session_info():
    u = current_user()
    s = get_settings()
    return jsonify(user={"username": u.username, "display_name": u.display_name, "role": u.role},
                   csrf_token=csrf_token(), facility={"id": s.facility_id, "name": s.facility_name,
                                                      "timezone": s.timezone},
                   server_time=utc_text(utcnow()), clock_warnings=clock_warnings())


@bp.post("/records")
def create():
    from clinic.store import Conflict

    rid = None
    try:
        body = _body()
        rid = body.get("id")
        require_kind(str(body.get("kind", "")))
        res = create_record(str(body.get("kind", "")), body.get("fields") or {}, current_user(),
                            record_id=rid, woman_id=body.get("woman_id"),
                            pregnancy_id=body.get("pregnancy_id"))
    except ValidationError as e:
        return _unprocessable(e)
    except Conflict as e:
        return _conflict(e, rid)
    rec = res.record
    if not res.created:
        return jsonify(record=rec, redirect=redirect_for(rec), replay=True), 200
    return jsonify(record=rec, redirect=redirect_for(rec)), 201


@bp.post("/bookings")
def bookings():
    from clinic.store import Conflict

    try:
        result = save_booking(_body(), current_user())
    except ValidationError as e:
        return _unprocessable(e)
    except Duplicates as e:
        return jsonify(error="a similar woman is on record; check she is not the same woman, "
                             "then send confirm_not_duplicate: true to save anyway",
                       duplicates=[_woman_brief(w) for w in e.women]), 409
    except Conflict as e:
        return jsonify(error=str(e), current_version=None), 409
    recs = result["records"]
    status = 200 if result["replay"] else 201
    return jsonify(records=recs, redirect=redirect_for(recs["pregnancy"]),
                   replay=result["replay"]), status


def _woman_brief(w: dict) -> dict:
    return {k: w.get(k) for k in ("id", "name", "birth_date", "stated_age", "village", "phone", "register_no")} | {
        "url": url_for("records.woman", woman_id=w["id"])}


@bp.get("/records/<record_id>")
def get_record(record_id):
    rec = get_store().get(record_id)
    if rec is None:
        return jsonify(error=f"no record with id {record_id!r}"), 404
    return jsonify(record=rec)


@bp.patch("/records/<record_id>")
def amend(record_id):
    from clinic.store import Conflict

    store = get_store()
    rec = store.get(record_id)
    if rec is None:
        return jsonify(error=f"no record with id {record_id!r}"), 404
    require_kind(rec["kind"])
    try:
        body = _body()
        errors = {}
        changes = body.get("changes")
        reason = str(body.get("reason") or "").strip()
        ev = body.get("expected_version")
        if not isinstance(changes, dict) or not changes:
            errors["changes"] = "give at least one field: new value"
        if not reason:
            errors["reason"] = "is required: say why the record is changed"
        if not isinstance(ev, int) or isinstance(ev, bool) or ev < 1:
            errors["expected_version"] = "is required: the version you changed (1 or more)"
        if errors:
            raise ValidationError(errors)
        if ev != rec.get("version"):
            raise Conflict(f"the record was amended meanwhile (now version {rec.get('version')}, "
                           f"you changed version {ev}); reload it and apply your change again")
        if changes == {"voided": True}:
            out = store.void(record_id, by=current_user().username, reason=reason, now=utcnow())
        else:
            check_dose_amendment(rec, changes, current_user())
            out = store.amend(record_id, changes, by=current_user().username, reason=reason,
                              expected_version=ev, now=utcnow())
    except ValidationError as e:
        return _unprocessable(e)
    except Conflict as e:
        return _conflict(e, record_id)
    return jsonify(record=out, redirect=redirect_for(out))


@bp.get("/pregnancies/<pregnancy_id>")
def pregnancy(pregnancy_id):
    store = get_store()
    preg = store.get(pregnancy_id)
    if preg is None or preg.get("kind") != "pregnancy":
        return jsonify(error=f"no pregnancy with id {pregnancy_id!r}"), 404
    from clinic.care.errors import CareError

    woman, preg, entries = store.history(pregnancy_id)
    try:
        plan, plan_error = jsonable(plan_for(pregnancy_id, (woman, preg, entries))), None
    except CareError as e:
        plan, plan_error = None, str(e)
    return jsonify(woman=woman, pregnancy=preg, entries=entries, plan=plan, plan_error=plan_error)


@bp.get("/worklist")
def get_worklist():
    flt = request.args.get("filter", "all")
    if flt not in worklist.FILTERS:
        return jsonify(errors={"filter": f"{flt!r} is not one of: {', '.join(worklist.FILTERS)}"}), 422
    wl = worklist.build(flt)
    return jsonify(filter=flt, caution=calcs.CAUTION, items=[{
        "item": jsonable(r["item"]),
        "woman": _woman_brief(r["woman"]) if r["woman"] else None,
        "pregnancy_id": r["pregnancy"]["id"],
        "url": url_for("records.pregnancy", pregnancy_id=r["pregnancy"]["id"]),
    } for r in wl["rows"]], alerts=[{
        "alert": jsonable(a["alert"]), "pregnancy_id": a["pregnancy"]["id"],
        "woman": _woman_brief(a["woman"]) if a["woman"] else None,
    } for a in wl["alerts"]])


@bp.get("/women")
def women():
    q = request.args.get("q", "").strip()
    if not q:
        return jsonify(errors={"q": "is required: a name, register number or phone"}), 422
    return jsonify(women=[_woman_brief(w) for w in get_store().search_women(q)])


@bp.get("/calc/<name>")
def calc(name):
    if name not in calcs.CALCULATORS:
        return jsonify(error=f"no calculator {name!r}; there are: {', '.join(calcs.CALCULATORS)}"), 404
    try:
        result = calcs.run(name, request.args)
    except ValidationError as e:
        return _unprocessable(e)
    return jsonify(calculator=name, result=jsonable(result),
                   caution=calcs.CAUTION if calcs.CALCULATORS[name].get("dose") else None)


@bp.get("/openapi.yaml")
def openapi():
    return Response(OPENAPI_FILE.read_text(encoding="utf-8"), mimetype="application/yaml")
