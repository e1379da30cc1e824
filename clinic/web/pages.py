"""Today (the worklist), Find a woman, the service worker and manifest, the main navigation."""
from __future__ import annotations

from flask import Blueprint, abort, current_app, redirect, render_template, request, send_from_directory, url_for

from clinic.accounts import roles as R
from clinic.web import worklist
from clinic.web.db import get_settings, get_store

bp = Blueprint("pages", __name__)

# (label, endpoint, key, permission) of the main navigation: a link shows only to a role
# that may open it (clinic.accounts.roles).
NAV = (
    ("Today", "pages.today", "today", R.READ_RECORDS),
    ("Find", "pages.find", "find", R.READ_RECORDS),
    ("Book", "records.booking", "book", R.BOOK),
    ("Calculators", "tools.calculators", "calc", R.CALC),
    ("Stock", "records.stock", "stock", R.STOCK_READ),
    ("Supply", "supply.index", "supply", R.STOCK_READ),
    ("Cards", "card.index", "card", R.CARD_READ),
    ("District", "district.index", "district", R.REPORT),
    ("Staff", "admin.users", "users", R.USERS),
    ("Audit", "admin.audit", "audit", R.AUDIT),
)


def nav_links():
    from clinic.web.auth import may

    district_office = get_settings().facility_kind == "district"
    out = []
    for label, target, key, permission in NAV:
        if not may(permission):
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
    from clinic.web.auth import home_url, may

    if get_settings().facility_kind == "district" and not request.args and may(R.REPORT):
        # The district office holds no women of its own: it starts on its report.
        return redirect(url_for("district.index"))
    if not may(R.READ_RECORDS):
        # Today lists women by name: a role that may not see names starts on its own page.
        target = home_url()
        if target == url_for("pages.today"):
            abort(403, "your role may not see the worklist and has no start page of its own")
        return redirect(target)
    flt = request.args.get("filter", "all")
    if flt not in worklist.FILTERS:
        abort(400, f"filter {flt!r} is not one of: {', '.join(worklist.FILTERS)}")
    from clinic.web import triage

    wl = worklist.build(flt)
    tiers = triage.triage(wl["rows"], wl["now"])
    urgent = tiers[0] if tiers and tiers[0].key == "now" else None
    return render_template("today.html", wl=wl, filters=worklist.FILTERS, nav_active="today",
                           urgent=urgent, later=tiers[1:] if urgent else tiers,
                           alert_groups=triage.alert_groups(wl["alerts"]), short_title=triage.short_title,
                           headline=triage.headline)


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
