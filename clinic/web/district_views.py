"""District pages: the monthly coverage report, downloads, bundle upload, clinic export.

    /district/                       the month's coverage: a summary chart first, then the tables,
                                     12-month trend charts, downloads
    /district/report.<fmt>?month=    csv, pdf, json, fhir (no names); fhir-records (names)
    /district/follow-up?month=       who was missed, by name (roles with the follow-up permission)
    /district/import                 upload many bundles at once (one fetch per file, progress)
    /district/export                 this clinic's bundle for the district (a button)

Everything is computed by clinic.reports (pure); these views only choose the month, the
role and the format.
"""
from __future__ import annotations

from pathlib import Path

from flask import Blueprint, Response, abort, jsonify, render_template, request

from clinic.accounts import roles as R
from clinic.reports import outputs
from clinic.reports.bundle import EXTENSION, export_bundle, export_state, import_bundle, import_log
from clinic.reports.month import Month, MonthFormatError
from clinic.web.auth import current_user, may
from clinic.web.db import get_data_dir, get_settings, get_store, utcnow

bp = Blueprint("district", __name__, url_prefix="/district")

AGGREGATE_FORMATS = ("csv", "pdf", "json", "fhir")
MAX_BUNDLE_BYTES = 64 * 1024 * 1024


def _month() -> Month:
    text = request.args.get("month", "").strip()
    if not text:
        # The last complete month is the one the monthly meeting looks at.
        return Month.of(utcnow(), get_settings().tz).shift(-1)
    try:
        return Month.parse(text)
    except MonthFormatError as e:
        abort(400, str(e))


def may_see_names() -> bool:
    return may(R.FOLLOW_UP)


def _prepared(month: Month):
    return outputs.prepare(get_store(), get_data_dir(), month, now=utcnow())


@bp.route("/")
def index():
    from clinic.reports.charts import chart
    from clinic.reports.coverage import ATTRIBUTION, CAUTION, DISTRICT, INDICATORS, NULL_PERCENT, TIME_ZONE_NOTE
    from clinic.reports.render_pdf import sections
    from clinic.reports.summary import summary_svg

    month = _month()
    p = _prepared(month)
    rep = p.report
    charts = {(f, i.id): chart(p.trend, f, i, rep.facility_name(f)) for f in rep.columns for i in INDICATORS}
    months = [month.shift(-k) for k in range(0, 13)]
    return render_template("district/report.html", rep=rep, month=month, months=months, sections=sections(),
                           indicators=INDICATORS, charts=charts, caution=CAUTION,
                           summary_chart=summary_svg(rep),
                           notes=[NULL_PERCENT, ATTRIBUTION, TIME_ZONE_NOTE], names=may_see_names(),
                           formats=AGGREGATE_FORMATS, follow_up_count=len(rep.follow_up) + len(rep.sensitisations),
                           district_key=DISTRICT, nav_active="district",
                           can_import=may(R.BUNDLE_IMPORT), can_export=may(R.BUNDLE_EXPORT))


@bp.route("/report.<fmt>")
def download(fmt):
    if fmt not in outputs.MEDIA:
        abort(404)
    if fmt in outputs.NAMED_FORMATS and not may_see_names():
        abort(403, f"your role may not see names; {fmt} lists women by name")
    month = _month()
    body = outputs.render_prepared(_prepared(month), fmt)
    mime, ext = outputs.MEDIA[fmt]
    resp = Response(body, mimetype=mime)
    resp.headers["Content-Disposition"] = f'attachment; filename="rhd-coverage-{month}.{ext}"'
    return resp


@bp.route("/follow-up")
def follow_up():
    from clinic.reports.coverage import indicator_by_id
    from clinic.reports.render_csv import follow_up_rows

    month = _month()
    p = _prepared(month)
    rows = follow_up_rows(p.report, p.women, get_settings().tz)
    for r in rows:
        r["title"] = indicator_by_id(r["indicator"]).title
        r["facility_name"] = p.report.facility_name(r["facility"])
        r["last_seen_name"] = p.report.facility_name(r["last_seen_at"])
    return render_template("district/follow_up.html", rows=rows, month=month, rep=p.report, nav_active="district")


@bp.route("/import", methods=["GET"])
def import_page():
    log = list(reversed(import_log(get_data_dir())))[:50]
    return render_template("district/import.html", log=log, extension=EXTENSION, results=None,
                           nav_active="district")


def _import_uploads(files) -> list:
    results = []
    for f in files:
        data = f.read(MAX_BUNDLE_BYTES + 1)
        name = Path(f.filename or "bundle").name
        if len(data) > MAX_BUNDLE_BYTES:
            results.append({"name": name, "status": "refused", "reason": "too-large",
                            "message": f"{name} is larger than {MAX_BUNDLE_BYTES // (1024 * 1024)} MB; "
                                       f"export smaller bundles with --since"})
            continue
        results.append(import_bundle(get_store(), get_data_dir(), data, name=name, now=utcnow(),
                                     by=current_user().username).to_dict())
    return results


@bp.route("/import", methods=["POST"])
def import_post():
    """Without JavaScript: every file of the form in one request; a page of results."""
    request.max_content_length = MAX_BUNDLE_BYTES * 8
    files = request.files.getlist("bundles")
    if not files or all(not f.filename for f in files):
        abort(400, "choose one or more bundle files (.rhlb) to import")
    results = _import_uploads(files)
    log = list(reversed(import_log(get_data_dir())))[:50]
    return render_template("district/import.html", log=log, extension=EXTENSION, results=results,
                           nav_active="district")


@bp.route("/import/file", methods=["POST"])
def import_one():
    """One bundle per request (the upload page sends each file with fetch, showing progress)."""
    request.max_content_length = MAX_BUNDLE_BYTES + 1024 * 1024
    f = request.files.get("bundle")
    if f is None or not f.filename:
        return jsonify(error="send one bundle file in the form field 'bundle'"), 400
    (res,) = _import_uploads([f])
    return jsonify(res), (200 if res["status"] == "imported" else 422)


@bp.route("/export", methods=["GET"])
def export_page():
    state = export_state(get_data_dir())
    return render_template("district/export.html", state=state, exports=list(reversed(state.get("exports", [])))[:20],
                           nav_active="district")


@bp.route("/export", methods=["POST"])
def export_post():
    """Everything new or changed since the last export, as a signed bundle to download."""
    s = get_settings()
    res = export_bundle(get_store(), get_data_dir(), facility=s.facility_id, since="LAST", now=utcnow())
    resp = Response(res.path.read_bytes(), mimetype="application/octet-stream")
    resp.headers["Content-Disposition"] = f'attachment; filename="{res.path.name}"'
    resp.headers["X-Bundle-Records"] = str(res.count)
    return resp

