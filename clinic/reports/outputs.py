"""One entry point for every output of the monthly report (command line and web pages)."""
from __future__ import annotations

import json
from datetime import datetime
from pathlib import Path

from clinic.reports.bundle import facility_care
from clinic.reports.case_cache import cache_for
from clinic.reports.cases import FullReport, facility_names_from_trust, load_inputs
from clinic.reports.coverage import compute_month, compute_trend
from clinic.reports.month import Month

NAMED_FORMATS = ("fhir-records", "follow-up")
MEDIA = {"csv": ("text/csv", "csv"), "pdf": ("application/pdf", "pdf"), "json": ("application/json", "json"),
         "fhir": ("application/fhir+json", "fhir.json"), "fhir-records": ("application/fhir+json", "records.fhir.json"),
         "follow-up": ("text/csv", "follow-up.csv")}


class Prepared:
    """The month's report, its trend, and the cases behind them (for the named outputs)."""

    def __init__(self, full: FullReport, cases, settings):
        self.report = full.report
        self.trend = full.trend
        self.cases = cases
        self.settings = settings

    @property
    def women(self) -> dict[str, dict]:
        return {c.woman["id"]: c.woman for c in self.cases}


def prepare(store, data_dir: Path, month: Month, *, now: datetime, months: int = 12) -> Prepared:
    settings = store.settings
    inp = load_inputs(store, settings, now=now, first_month=month.shift(-(months - 1)),
                      facility_care=facility_care(data_dir), facility_names=facility_names_from_trust(data_dir),
                      cache=cache_for(store))
    tz = settings.tz
    rep = compute_month(inp.cases, month, tz, now=now, stock_records=inp.stock, facilities=inp.facilities,
                        facility_names=inp.facility_names, profile=inp.profile_label, profiles=inp.profiles)
    trend = compute_trend(inp.cases, month, tz, now=now, months=months, facilities=rep.facilities)
    return Prepared(FullReport(rep, trend), inp.cases, settings)


def render_prepared(p: Prepared, fmt: str) -> str | bytes:
    from clinic.reports import render_csv, render_fhir, render_json

    tz = p.settings.tz
    if fmt == "csv":
        return render_csv.coverage_csv(p.trend)
    if fmt == "json":
        return render_json.coverage_json(p.report, p.trend)
    if fmt == "fhir":
        return json.dumps(render_fhir.measure_bundle(p.report, tz), indent=2, ensure_ascii=False) + "\n"
    if fmt == "fhir-records":
        return json.dumps(render_fhir.records_bundle(p.cases, p.report), indent=2, ensure_ascii=False) + "\n"
    if fmt == "follow-up":
        return render_csv.follow_up_csv(p.report, p.women, tz)
    if fmt == "pdf":
        from clinic.reports.render_pdf import report_pdf

        return report_pdf(p.report, p.trend)
    raise ValueError(f"format {fmt!r} is not one of {', '.join(MEDIA)}")


def render(store, data_dir: Path, month: Month, fmt: str, *, now: datetime, months: int = 12) -> str | bytes:
    if fmt not in MEDIA:
        raise ValueError(f"format {fmt!r} is not one of {', '.join(MEDIA)}")
    return render_prepared(prepare(store, data_dir, month, now=now, months=months), fmt)
