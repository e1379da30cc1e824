"""The Supply page: anti-D needed in the coming weeks, stock-out dates, lots expiring unused,
orders and (at a district office) transfers between clinics.

    /supply/                    the page (its own facility at a clinic; every clinic at the district)
    /supply/forecast.csv        the same figures as one tidy CSV
    /supply/forecast.json       the JSON of docs/supply-forecast.md

The figures are clinic.reports.supply's (clinic.supply, pure); this view only picks the
horizon and the format. It names no woman: the roles that see the anti-D stock read it
(clinic.accounts.roles.STOCK_READ, in clinic.web.access).
"""
from __future__ import annotations

from flask import Blueprint, Response, abort, render_template, request

from clinic.reports.supply import supply_report
from clinic.supply.render import csv_text, json_text
from clinic.web.db import get_data_dir, get_settings, get_store, utcnow

bp = Blueprint("supply", __name__, url_prefix="/supply")


def _weeks() -> int:
    text = request.args.get("weeks", "").strip()
    if not text:
        return get_settings().supply.horizon_weeks
    if not text.isdigit() or not 1 <= int(text) <= 52:
        abort(400, f"weeks {text!r}: a whole number from 1 to 52")
    return int(text)


def _report(weeks: int):
    return supply_report(get_store(), get_data_dir(), now=utcnow(), weeks=weeks)


@bp.route("/")
def index():
    weeks = _weeks()
    rep = _report(weeks)
    district = get_settings().facility_kind == "district"
    return render_template("supply/index.html", rep=rep, weeks=weeks, district=district,
                           choices=sorted({4, 8, 12, 26, weeks}), nav_active="supply")


@bp.route("/forecast.<fmt>")
def download(fmt):
    if fmt not in ("csv", "json"):
        abort(404)
    weeks = _weeks()
    rep = _report(weeks)
    body = csv_text(rep) if fmt == "csv" else json_text(rep)
    mime = "text/csv" if fmt == "csv" else "application/json"
    resp = Response(body, mimetype=mime)
    resp.headers["Content-Disposition"] = f'attachment; filename="anti-d-forecast-{rep.start.isoformat()}.{fmt}"'
    return resp
