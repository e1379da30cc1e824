"""Pages that show and write records: booking, the woman, the pregnancy's record (time line,
plan, charts), one entry form per kind (generated from the schema), amend, void, stock.

Every data-entry form follows the form/outbox contract (see DEVELOPERS.md): it posts JSON to
/api/v1/records through static/js/outbox.js, and without JavaScript to the page's own URL,
which validates the same way through clinic.web.saving.
"""
from __future__ import annotations

from flask import Blueprint, abort, flash, redirect, render_template, request, url_for

from clinic.care.codes import Category
from clinic.care.errors import CareError
from clinic.records.schema import ENTRY_KINDS, KINDS
from clinic.records.validate import ValidationError
from clinic.store import Conflict
from clinic.web import charts
from clinic.web import stock as stockmod
from clinic.web.auth import current_user, may_write_kind, require_kind
from clinic.web.clock import today_local
from clinic.web.db import get_profile, get_settings, get_store, plan_for, utcnow
from clinic.web.helpers import form_raw, local_input
from clinic.web.saving import BOOKING_PARTS, Duplicates, check_dose_amendment, create_record, redirect_for, save_booking

bp = Blueprint("records", __name__)

# Fields of the woman and pregnancy asked at booking (the rest can be added later by amending).
BOOKING_FIELDS = {
    "woman": ("name", "birth_date", "stated_age", "village", "phone", "register_no", "address"),
    "pregnancy": ("booked_on", "lmp", "scan_on", "scan_crl_mm", "scan_ga_days", "edd", "gravidity",
                  "parity", "multiple", "prior_sensitising", "prior_anti_d", "transfusion_history"),
    "typing": ("abo", "rhd", "weak_d_type", "partial_d_category", "method", "tested_on", "lab"),
    "partner_typing": ("abo", "rhd", "rhd_zygosity", "tested_on", "paternity_certain"),
    "screen": ("sampled_at", "result", "antibodies", "antibody_other", "titre", "titre_antibody",
               "anti_d_iu_ml", "anti_d_origin", "lab"),
}
PART_LABELS = {"woman": "Woman", "pregnancy": "This pregnancy and its dating",
               "typing": "Her blood group", "partner_typing": "Baby's father's blood group",
               "screen": "Booking antibody screen (IAT)"}
# The dose indication to preset when a dose is recorded from a plan item of this category.
INDICATION_OF = {Category.ROUTINE: "routine-antenatal", Category.EVENT: "sensitising-event",
                 Category.POSTPARTUM: "postpartum"}


def time_of(rec: dict) -> str:
    """The moment an entry is about (its first date or date-time field), for the time line."""
    spec = KINDS.get(rec.get("kind"))
    if spec:
        for f in spec.fields:
            if f.type in ("date", "datetime") and rec.get(f.name):
                v = rec[f.name]
                return v if f.type == "datetime" else v + "T12:00:00Z"
    return rec.get("created_at", "")


def _pregnancy_or_404(pregnancy_id: str) -> dict:
    p = get_store().get(pregnancy_id)
    if p is None or p.get("kind") != "pregnancy":
        abort(404, f"No pregnancy with id {pregnancy_id} on record.")
    return p


def _record_or_404(record_id: str) -> dict:
    r = get_store().get(record_id)
    if r is None:
        abort(404, f"No record with id {record_id} on record.")
    return r


def ref_options(pregnancy_id: str) -> list[tuple[str, str]]:
    """Events and births of the pregnancy (not voided), for the 'covers' fields."""
    from clinic.web.helpers import local

    out = []
    for e in sorted(get_store().entries(pregnancy_id), key=time_of, reverse=True):
        if e.get("voided") or e.get("kind") not in ("event", "birth"):
            continue
        if e["kind"] == "event":
            label = f"Event · {e.get('event_kind')} · {local(e.get('occurred_at'), '%d %b %Y %H:%M')}"
        else:
            label = f"Birth · {local(e.get('born_at'), '%d %b %Y %H:%M')}"
        out.append((e["id"], label))
    return out


@bp.route("/book", methods=["GET", "POST"])
def booking():
    store = get_store()
    woman_id = request.values.get("woman_id") or None
    existing = store.get(woman_id) if woman_id else None
    if woman_id and (existing is None or existing.get("kind") != "woman"):
        abort(404, f"No woman with id {woman_id} on record.")
    values = {p: {} for p in BOOKING_PARTS}
    values["pregnancy"] = {"booked_on": today_local(), "status": "ongoing"}
    errors: dict = {}
    duplicates = []
    ids = {p: request.form.get(f"{p}.id") or "" for p in BOOKING_PARTS}
    if request.method == "POST":
        body = {"confirm_not_duplicate": request.form.get("confirm_not_duplicate") == "yes"}
        for part in BOOKING_PARTS:
            if part == "woman" and existing:
                body["woman"] = {"id": existing["id"]}
                continue
            sub = _prefixed(request.form, part)
            raw = form_raw(part, sub)
            if part == "pregnancy":
                raw.setdefault("status", "ongoing")
            values[part] = raw
            body[part] = {"id": ids[part] or None, "fields": raw}
        # Ids made once per form so a resubmission after a warning stays one booking.
        import uuid

        for part in BOOKING_PARTS:
            if part in body and not body[part].get("id"):
                body[part]["id"] = ids[part] = str(uuid.uuid4())
        try:
            result = save_booking(body, current_user())
        except ValidationError as e:
            errors = e.errors
        except Duplicates as e:
            duplicates = e.women
        except Conflict as e:
            errors = {"_form": f"{e}. This booking form was saved before with other values: open the "
                               f"woman's record to amend it, or start a new booking."}
        else:
            flash("Booking saved." if not result["replay"] else "This booking was already saved.")
            return redirect(redirect_for(result["records"]["pregnancy"]))
    status = 422 if errors else (409 if duplicates else 200)
    return render_template("booking.html", values=values, errors=errors, duplicates=duplicates,
                           dating_text=_dating_text(values["pregnancy"]),
                           ids=ids, existing=existing, fields=BOOKING_FIELDS, labels=PART_LABELS,
                           KINDS=KINDS, nav_active="book"), status


def _dating_text(preg: dict) -> str:
    """'GA today 12+3 · EDD …' for the booking form, by the care engine's dating rule."""
    from werkzeug.datastructures import MultiDict

    from clinic.web import calcs

    keys = ("lmp", "scan_on", "scan_crl_mm", "scan_ga_days", "edd")
    if not any(preg.get(k) for k in keys):
        return ""
    try:
        r = calcs.run("dating", MultiDict({k: str(preg[k]) for k in keys + ("booked_on",) if preg.get(k)}))
    except ValidationError:
        return ""
    return f"GA today {r['ga_today']} · EDD {r['edd']} ({r['method']}) · {r['reason']}"


def _prefixed(form, part: str):
    from werkzeug.datastructures import MultiDict

    pre = part + "."
    return MultiDict([(k[len(pre):], v) for k, vs in form.lists() if k.startswith(pre) for v in vs])


@bp.route("/women/<woman_id>")
def woman(woman_id):
    w = _record_or_404(woman_id)
    if w.get("kind") != "woman":
        abort(404, f"No woman with id {woman_id} on record.")
    pregs = sorted((p for p in get_store().pregnancies() if p.get("woman_id") == woman_id),
                   key=lambda p: p.get("booked_on", ""), reverse=True)
    return render_template("woman.html", woman=w, pregnancies=pregs, kind=KINDS["woman"])


@bp.route("/pregnancies/<pregnancy_id>")
def pregnancy(pregnancy_id):
    _pregnancy_or_404(pregnancy_id)
    store = get_store()
    woman, preg, entries = store.history(pregnancy_id)
    try:
        plan, plan_error = plan_for(pregnancy_id, (woman, preg, entries)), None
    except CareError as e:
        plan, plan_error = None, str(e)
    all_entries = sorted(entries, key=time_of, reverse=True)
    return render_template(
        "pregnancy.html", woman=woman, preg=preg, entries=all_entries, plan=plan, plan_error=plan_error,
        entry_kinds=[KINDS[k] for k in ENTRY_KINDS if may_write_kind(k)], time_of=time_of,
        titre_svg=charts.titre_chart(titre_points(all_entries, plan)),
        mca_svg=charts.mca_chart(mca_points(all_entries, plan), _mca_median, charts.mom_lines(get_profile())),
        stock_links=_stock_links(all_entries) if may_write_kind("stock") else {})


def ga_of(entry: dict, plan) -> int | None:
    """GA in days of an entry: as recorded, else from the plan's EDD (the care engine's dating)."""
    if entry.get("ga_days") is not None:
        return int(entry["ga_days"])
    edd = (getattr(plan, "dating", None) or {}).get("edd")
    when = time_of(entry)
    if edd is None or not when:
        return None
    from clinic.care.dating import ga_on
    from clinic.web.helpers import as_dt

    return ga_on(as_dt(when), edd=edd, tz=get_settings().tz)


def titre_points(entries, plan) -> list[tuple[int, int, str]]:
    pts = []
    for e in entries:
        if e.get("kind") == "screen" and not e.get("voided") and e.get("titre"):
            g = ga_of(e, plan)
            if g is not None:
                pts.append((g, int(e["titre"]), e.get("titre_antibody") or "antibody"))
    return pts


def mca_points(entries, plan) -> list[tuple[int, float]]:
    pts = []
    for e in entries:
        if e.get("kind") == "doppler" and not e.get("voided") and e.get("mca_psv_cm_s") is not None:
            g = ga_of(e, plan)
            if g is not None:
                pts.append((g, float(e["mca_psv_cm_s"])))
    return pts


def _mca_median(ga_days: int) -> float:
    from clinic.care.calc import mca_psv_median

    return mca_psv_median(ga_days)


def _stock_links(entries) -> dict[str, str]:
    """dose id -> link to record its vials as 'given' in the stock ledger (doses not yet taken off)."""
    from clinic.care.calc import vials_for

    taken = {r.get("dose_id") for r in get_store().iter_records(kind="stock") if not r.get("voided")}
    products = {p.name: p for p in get_settings().products}
    out = {}
    for e in entries:
        if e.get("kind") != "dose" or e.get("voided") or e["id"] in taken:
            continue
        args = {"move": "given", "dose_id": e["id"], "lot": e.get("lot"), "lot_expiry": e.get("lot_expiry")}
        p = products.get(e.get("product") or "")
        if p is not None:
            args.update(product=p.name, vial_iu=p.vial_iu, vials=vials_for(e.get("dose_iu") or 1, p.vial_iu))
        out[e["id"]] = url_for("records.stock", **{k: v for k, v in args.items() if v})
    return out


def entry_defaults(kind: str, pregnancy_id: str | None) -> dict:
    """Sensible starting values: now/today, the stocked product, the plan item the link came from."""
    spec = KINDS[kind]
    s = get_settings()
    vals: dict = {}
    now_in = local_input(utcnow())
    for f in spec.fields:
        if f.required and f.type == "datetime":
            vals[f.name] = now_in
        elif f.required and f.type == "date" and f.not_future:
            vals[f.name] = today_local()
    proposed = int(request.args["dose_iu"]) if request.args.get("dose_iu", "").isdigit() else None
    if kind in ("dose", "stock") and s.products:
        p = _product_for(s.products, proposed)
        vals["product"] = p.name
        if kind == "dose":
            vals.update(amount=proposed or p.vial_iu, unit="IU", route=p.routes[0] if p.routes else "IM",
                        given_by=current_user().display_name)
            lot = stockmod.suggest_lot(p.name)
            if lot:
                vals.update(lot=lot["lot"], lot_expiry=lot["lot_expiry"])
        else:
            vals["vial_iu"] = p.vial_iu
    if kind == "dose":
        if proposed and "amount" not in vals:
            vals.update(amount=proposed, unit="IU")
        cat = request.args.get("category")
        if cat in INDICATION_OF:
            vals["indication"] = INDICATION_OF[cat]
    if kind in ("dose", "fmh") and request.args.get("covers"):
        vals["covers_id"] = request.args["covers"]
    if kind == "stock":
        # From a dose's "take from stock" link: the movement, the dose and its lot.
        for name in ("move", "dose_id", "product", "lot", "lot_expiry", "vials", "vial_iu"):
            if request.args.get(name):
                vals[name] = request.args[name]
    return vals


def _product_for(products, dose_iu):
    """The stocked product for a proposed dose: the smallest vial that covers it (else the first)."""
    if dose_iu:
        covering = [p for p in products if p.vial_iu >= dose_iu]
        if covering:
            return min(covering, key=lambda p: p.vial_iu)
    return products[0]


@bp.route("/pregnancies/<pregnancy_id>/add/<kind>", methods=["GET", "POST"])
def add_entry(pregnancy_id, kind):
    if kind not in ENTRY_KINDS:
        abort(404, f"{kind!r} is not an entry kind; allowed: {', '.join(ENTRY_KINDS)}")
    require_kind(kind)
    preg = _pregnancy_or_404(pregnancy_id)
    woman = get_store().get(preg["woman_id"])
    errors: dict = {}
    values = entry_defaults(kind, pregnancy_id)
    record_id = request.form.get("id") or ""
    if request.method == "POST":
        values = form_raw(kind, request.form)
        try:
            res = create_record(kind, values, current_user(), record_id=record_id or None,
                                pregnancy_id=pregnancy_id)
        except ValidationError as e:
            errors = e.errors
        except Conflict as e:
            errors = {"_form": f"{e}. This form was saved before with other values: amend the saved "
                               f"entry on the record instead."}
        else:
            flash(f"{KINDS[kind].label} saved." if res.created else f"{KINDS[kind].label} was already saved.")
            return redirect(redirect_for(res.record))
    return render_template("entry_form.html", kind=KINDS[kind], values=values, errors=errors,
                           preg=preg, woman=woman, options=ref_options(pregnancy_id),
                           dating_text=_dating_text(preg) if "ga_days" in KINDS[kind].field_names else "",
                           action=url_for("records.add_entry", pregnancy_id=pregnancy_id, kind=kind),
                           record_id=record_id), (422 if errors else 200)


@bp.route("/records/<record_id>/amend", methods=["GET", "POST"])
def amend(record_id):
    rec = _record_or_404(record_id)
    require_kind(rec["kind"])
    spec = KINDS[rec["kind"]]
    errors: dict = {}
    values = {f.name: rec.get(f.name) for f in spec.fields}
    reason = ""
    conflict = None
    if request.method == "POST":
        shown = request.form.getlist("_shown")
        raw = form_raw(rec["kind"], request.form, partial=True, only=set(shown) or None)
        values.update(raw)
        reason = request.form.get("reason", "").strip()
        try:
            ev = int(request.form.get("expected_version", ""))
        except ValueError:
            ev = None
        changes = {k: v for k, v in raw.items() if _changed(spec.field(k), rec.get(k), v)}
        if not reason:
            errors["reason"] = "is required: say why the record is changed"
        if not changes:
            errors["_form"] = "nothing was changed"
        if ev != rec.get("version"):
            conflict = (f"This record was amended by someone else meanwhile (now version "
                        f"{rec.get('version')}). Check the current values below and apply your change again.")
        if not errors and not conflict:
            try:
                check_dose_amendment(rec, changes, current_user())
                out = get_store().amend(record_id, changes, by=current_user().username, reason=reason,
                                        expected_version=ev, now=utcnow())
            except ValidationError as e:
                errors = e.errors
            except Conflict as e:
                conflict = str(e)
            else:
                flash("Amendment saved; the earlier values stay visible.")
                return redirect(redirect_for(out))
        if conflict:
            rec = _record_or_404(record_id)
            values = {f.name: rec.get(f.name) for f in spec.fields}
    status = 409 if conflict else (422 if errors else 200)
    return render_template("amend.html", rec=rec, kind=spec, values=values, errors=errors,
                           reason=reason, conflict=conflict,
                           options=ref_options(rec["pregnancy_id"]) if rec.get("pregnancy_id") else None), status


def _changed(f, old, new) -> bool:
    """Whether a form value differs from the stored one (compared as the form shows it)."""
    from clinic.web.helpers import ga_text

    if new in (None, "", []):
        return old not in (None, "", [])
    if f.type == "datetime":
        return local_input(old) != str(new).strip()[:16] if old else True
    if f.type == "ga":
        return ga_text(old) != str(new).strip() if old is not None else True
    if f.type == "bool":
        if old is None and f.unticked_is_no:
            return True  # a question the record never answered: the form's answer (even "no") is new
        return bool(old) != (str(new).lower() in ("yes", "true", "on", "1"))
    if f.type == "choices":
        return list(old or []) != list(new)
    if f.type in ("int", "float"):
        try:
            return old is None or float(old) != float(str(new).replace(",", "."))
        except ValueError:
            return True
    return str(old if old is not None else "") != str(new).strip()


@bp.route("/records/<record_id>/void", methods=["GET", "POST"])
def void(record_id):
    rec = _record_or_404(record_id)
    require_kind(rec["kind"])
    errors: dict = {}
    if rec.get("voided"):
        abort(409, "This record is already voided.")
    if request.method == "POST":
        reason = request.form.get("reason", "").strip()
        if not reason:
            errors["reason"] = "is required: say why this entry should not count"
        else:
            out = get_store().void(record_id, by=current_user().username, reason=reason, now=utcnow())
            flash("Entry voided; it stays on record, struck through.")
            return redirect(redirect_for(out))
    return render_template("void.html", rec=rec, kind=KINDS[rec["kind"]], errors=errors), (422 if errors else 200)


@bp.route("/stock", methods=["GET", "POST"])
def stock():
    errors: dict = {}
    values = entry_defaults("stock", None)
    record_id = request.form.get("id") or ""
    if request.method == "POST":
        user = current_user()
        values = form_raw("stock", request.form)
        try:
            res = create_record("stock", values, user, record_id=record_id or None)
        except ValidationError as e:
            errors = e.errors
        except Conflict as e:
            errors = {"_form": f"{e}. This form was saved before with other values: amend the saved "
                               f"movement instead."}
        else:
            flash("Stock movement saved." if res.created else "This movement was already saved.")
            return redirect(url_for("records.stock"))
    moves = sorted(get_store().iter_records(kind="stock"), key=lambda r: r.get("at", ""), reverse=True)
    return render_template("stock.html", kind=KINDS["stock"], values=values, errors=errors,
                           moves=moves, on_hand=stockmod.on_hand(moves), record_id=record_id,
                           nav_active="stock"), (422 if errors else 200)
