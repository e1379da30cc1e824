"""Today (the worklist), Find a woman, the service worker and manifest, error pages, nav."""
from __future__ import annotations

from flask import Blueprint, abort, current_app, redirect, render_template, request, send_from_directory, url_for

from clinic.web import worklist
from clinic.web.db import get_settings, get_store

bp = Blueprint("pages", __name__)

# (label, endpoint, key) of the main navigation.
NAV = (
    ("Today", "pages.today", "today"),
    ("Find", "pages.find", "find"),
    ("Book", "records.booking", "book"),
    ("Calculators", "tools.calculators", "calc"),
    ("Stock", "records.stock", "stock"),
    ("Supply", "supply.index", "supply"),
    ("Cards", "card.index", "card"),
    ("District", "district.index", "district"),
)


def nav_links():
    from clinic.web.auth import WRITE_ROLES, current_user

    user = current_user()
    district_office = get_settings().facility_kind == "district"
    out = []
    for label, target, key in NAV:
        if key == "book" and (user is None or user.role not in WRITE_ROLES):
            continue
        if district_office and key in ("today", "stock"):
            continue  # the district office cares for no women and holds no anti-D: it starts on its report
        out.append((label, url_for(target), key))
    return out


@bp.app_context_processor
def _inject():
    return {"settings": get_settings(), "nav_links": nav_links}


@bp.route("/")
def today():
    if get_settings().facility_kind == "district" and not request.args:
        # The district office holds no women of its own: it starts on its report.
        return redirect(url_for("district.index"))
    flt = request.args.get("filter", "all")
    if flt not in worklist.FILTERS:
        abort(400, f"filter {flt!r} is not one of: {', '.join(worklist.FILTERS)}")
    from clinic.web.auth import WRITE_ROLES

    wl = worklist.build(flt)
    return render_template("today.html", wl=wl, filters=worklist.FILTERS, nav_active="today",
                           write_roles=WRITE_ROLES)


@bp.route("/find")
def find():
    q = request.args.get("q", "").strip()
    results = get_store().search_women(q) if q else []
    rows = []
    if results:
        by_woman: dict = {}
        for p in get_store().pregnancies():
            by_woman.setdefault(p.get("woman_id"), []).append(p)
        for w in results:
            pregs = sorted(by_woman.get(w["id"], []), key=lambda p: p.get("booked_on", ""), reverse=True)
            rows.append({"woman": w, "pregnancies": pregs})
    return render_template("find.html", q=q, rows=rows,
                           nav_active="find")


@bp.route("/sw.js")
def service_worker():
    # static/sw.js with its cache version and pre-cache list filled in (web-offline's module).
    from clinic.web.setup_views import service_worker_response

    return service_worker_response()


@bp.route("/manifest.webmanifest")
def manifest():
    resp = send_from_directory(current_app.static_folder, "manifest.webmanifest",
                               mimetype="application/manifest+json", max_age=0)
    resp.headers["Cache-Control"] = "no-cache"
    return resp


def _error_page(e):
    from flask import jsonify

    from clinic.web.auth import is_api

    code = getattr(e, "code", 500) or 500
    desc = getattr(e, "description", str(e))
    if is_api():
        return jsonify(error=desc), code
    return render_template("error.html", code=code, message=desc), code


def _server_error(e):
    from werkzeug.exceptions import InternalServerError

    current_app.logger.exception("request failed", exc_info=getattr(e, "original_exception", None) or e)
    return _error_page(InternalServerError(
        "The laptop could not complete this request. Open the record to check what was saved before "
        "trying again, and tell whoever looks after this installation."))


def register_errors(app):
    for code in (400, 403, 404, 405, 409, 413):
        app.register_error_handler(code, _error_page)
    app.register_error_handler(500, _server_error)
