"""CSV, JSON and PDF outputs: tidy rows, our JSON shape, the caution, and no names."""
from __future__ import annotations

import csv
import io
import json

from clinic.reports.coverage import CAUTION, INDICATORS
from clinic.reports.render_csv import COLUMNS, coverage_csv, follow_up_csv
from clinic.reports.render_json import coverage_dict
from clinic.reports.render_pdf import report_html, report_pdf
from tests.reports import dataset as ds

NAMES = ("Amina", "Chipo", "Grace", "Rehema", "Sauda", "Test-")


def test_csv_has_one_tidy_row_per_month_facility_and_indicator(trend):
    rows = list(csv.DictReader(io.StringIO(coverage_csv(trend))))
    assert tuple(rows[0].keys()) == COLUMNS
    # 12 months x (2 clinics + district) x every indicator
    assert len(rows) == 12 * 3 * len(INDICATORS)
    keys = {(r["month"], r["facility"], r["indicator"]) for r in rows}
    assert len(keys) == len(rows)
    pp = next(
        r for r in rows if (r["month"], r["facility"], r["indicator"]) == ("2026-11", "district", "postpartum_missed")
    )
    assert (pp["numerator"], pp["denominator"], pp["percentage"]) == ("2", "4", "50.0")
    # a zero denominator: the percentage is empty, not 0
    ev = next(r for r in rows if (r["month"], r["facility"], r["indicator"]) == ("2026-11", ds.A, "event_on_time"))
    assert (ev["numerator"], ev["denominator"], ev["percentage"]) == ("0", "0", "")


def test_json_gives_numerator_and_denominator_per_facility_and_district(november, trend):
    doc = json.loads(json.dumps(coverage_dict(november, trend)))
    assert doc["format"] == "rhledger-coverage" and doc["month"] == "2026-11"
    assert doc["facilities"][ds.B]["indicators"]["routine_not_given"] == {
        "numerator": 1,
        "denominator": 3,
        "percentage": 33.3,
        "outcomes": {"not-given": 1, "on-time": 2},
    }
    assert doc["district"]["indicators"]["typed_at_booking"]["numerator"] == 4
    assert doc["district"]["indicators"]["typed_at_booking"]["denominator"] == 5
    assert doc["caution"] == CAUTION
    assert all(i["definition"] for i in doc["indicators"])


def test_aggregate_outputs_carry_no_names(november, trend):
    for text in (coverage_csv(trend), json.dumps(coverage_dict(november, trend)), report_html(november, trend)):
        for n in NAMES:
            assert n not in text


def test_follow_up_list_names_the_missed_doses(november, inputs):
    women = {c.woman["id"]: c.woman for c in inputs.cases}
    rows = list(csv.DictReader(io.StringIO(follow_up_csv(november, women, ds.TZ))))
    missed = {(r["name"], r["indicator"]) for r in rows}
    assert ("Grace Test-Routine-Missed", "routine_not_given") in missed
    assert ("Nia Test-Second-Missing", "routine_not_given") in missed
    assert ("Rehema Test-Event-None", "event_none") in missed
    assert ("Sauda Test-Baby-Untyped", "postpartum_missed") in missed
    moved = [r for r in rows if r["last_seen_at"] != r["facility"]]
    assert moved == []  # the moved woman was screened at B: nothing of hers is missed


def test_pdf_has_charts_definitions_and_caution_without_weasyprint_warnings(november, trend, weasy_warnings):
    html = report_html(november, trend)
    assert CAUTION in html and "<svg" in html and "<script" not in html
    assert all(i.definition[:40] in html for i in INDICATORS)
    pdf = report_pdf(november, trend)
    assert pdf[:5] == b"%PDF-" and len(pdf) > 10_000
    assert [r.getMessage() for r in weasy_warnings] == []


def test_pdf_fetcher_refuses_files_outside_printables():
    import pytest
    from weasyprint.urls import FatalURLFetchingError

    from clinic.reports.render_pdf import _fetcher_class

    f = _fetcher_class()()
    with pytest.raises(FatalURLFetchingError):
        f.fetch("file:///etc/passwd")
    with pytest.raises(FatalURLFetchingError):
        f.fetch("https://example.invalid/font.ttf")
