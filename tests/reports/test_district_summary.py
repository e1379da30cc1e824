"""The coverage page opens with a summary: the headline indicators per facility as one small
chart (clinic/reports/summary.py), drawn on the server, before the tables."""
from __future__ import annotations

import re

from clinic.reports.coverage import DISTRICT
from clinic.reports.summary import HEADLINE, summary_rows, summary_svg
from tests.reports.test_district_pages import bundle_files, district_app, officer, upload  # noqa: F401


def test_one_row_per_facility_then_the_district_with_the_report_figures(november):
    rows = summary_rows(november)
    assert [r.facility for r in rows] == list(november.columns) and rows[-1].facility == DISTRICT
    assert rows[-1].is_district and rows[-1].name == november.facility_name(DISTRICT)
    for row in rows:
        assert [c.indicator for c in row.cells] == [i for i, _ in HEADLINE]
        for c in row.cells:
            cell = november.cell(row.facility, c.indicator)
            assert (c.numerator, c.denominator, c.percentage) == (cell.numerator, cell.denominator, cell.percentage)


def test_a_cell_with_nothing_due_is_a_dash_never_zero(november):
    cells = [c for r in summary_rows(november) for c in r.cells]
    for c in cells:
        if not c.denominator:
            assert c.text == "–" and c.fraction == "none due"
        else:
            assert c.text == f"{c.percentage:.0f}%" and c.fraction == f"{c.numerator}/{c.denominator}"


def test_the_chart_is_plain_svg_with_its_words_and_no_style_attribute(november):
    svg = summary_svg(november)
    assert svg.startswith("<svg") and svg.endswith("</svg>")
    assert "style=" not in svg and "<script" not in svg and "href" not in svg
    assert 'role="img"' in svg and "<title" in svg and "<desc" in svg
    for row in summary_rows(november):
        assert all(word in svg for word in row.name.split()), row.name
    desc = re.search(r"<desc[^>]*>(.*?)</desc>", svg).group(1)
    assert "Postpartum dose within 72 h" in desc and "District:" in desc


def test_no_facility_no_chart(november):
    import dataclasses
    empty = dataclasses.replace(november, facilities=[])
    assert summary_svg(empty) == ""


def test_the_district_page_opens_with_the_summary_before_its_tables(officer, bundle_files):  # noqa: F811
    for p in bundle_files.values():
        upload(officer, p)
    html = officer.get("/district/?month=2026-11").get_data(as_text=True)
    assert html.index('id="summary"') < html.index('<table class="cov">')
    summary = re.search(r'<section class="summary" id="summary">(.*?)</section>', html, re.S).group(1)
    assert "summary-chart" in summary and "Invented Clinic A" in summary
    assert "style=" not in summary
