"""Every exported CSV cell that begins with =, +, -, @, a tab or a carriage return is neutralised
(a leading apostrophe), so a spreadsheet shows it as text instead of evaluating it."""
from __future__ import annotations

import csv
import dataclasses
import io

import pytest

from clinic.records.csv_cells import safe_cell
from clinic.reports.render_csv import coverage_csv, follow_up_csv
from tests.reports import dataset as ds
from tests.reports.conftest import inputs, november, trend, truth_store  # noqa: F401 - fixtures

ATTACKS = ("=HYPERLINK(\"http://evil.invalid\",\"x\")", "+1+cmd|' /C calc'!A0", "-2+3", "@SUM(A1:A9)",
           "\t=1+1", "\r=1+1")


@pytest.mark.parametrize("text", ATTACKS)
def test_a_cell_that_a_spreadsheet_would_evaluate_is_neutralised(text):
    assert safe_cell(text) == "'" + text


@pytest.mark.parametrize("text", ["Amina", "0700 000 001", "", "a=b", "Grace -", "2026-11"])
def test_ordinary_text_and_numbers_are_left_alone(text):
    assert safe_cell(text) == text
    assert safe_cell(-3) == -3 and safe_cell(12.5) == 12.5 and safe_cell(None) is None


def _cells(text: str) -> list[str]:
    return [c for row in csv.reader(io.StringIO(text, newline="")) for c in row]


def test_the_follow_up_list_neutralises_names_villages_and_phones(november, inputs):
    women = {}
    for i, c in enumerate(inputs.cases):
        attack = ATTACKS[i % len(ATTACKS)]
        women[c.woman["id"]] = dict(c.woman, name=attack, village=attack, phone="+000 700 000 101",
                                    register_no=attack)
    text = follow_up_csv(november, women, ds.TZ)
    cells = _cells(text)
    assert len(cells) > 24
    bad = [c for c in cells if c[:1] in ("=", "+", "-", "@", "\t", "\r")]
    assert not bad, bad
    assert "'+000 700 000 101" in cells  # shown as typed once opened


def test_a_carriage_return_inside_a_cell_cannot_start_a_row(november, inputs):
    women = {c.woman["id"]: dict(c.woman, name="Ok\r=1+1", village="x\n@SUM(A1)") for c in inputs.cases}
    rows = list(csv.reader(io.StringIO(follow_up_csv(november, women, ds.TZ), newline="")))
    width = len(rows[0])
    assert all(len(r) == width for r in rows)
    assert not [c for r in rows for c in r if c[:1] in ("=", "+", "-", "@", "\t", "\r")]


def test_the_coverage_csv_neutralises_facility_names(november, trend):
    evil = {f: "=HYPERLINK(\"http://evil.invalid\")" for f in november.facilities}
    renamed = {m: dataclasses.replace(r, facility_names=evil) for m, r in trend.items()}
    cells = _cells(coverage_csv(renamed))
    assert "'=HYPERLINK(\"http://evil.invalid\")" in cells
    assert not [c for c in cells if c[:1] in ("=", "+", "-", "@", "\t", "\r")]


def test_every_csv_writer_of_the_app_goes_through_the_safe_cells():
    """A new CSV export that writes cells itself fails here (clinic/records/csv_cells.py)."""
    from pathlib import Path

    root = Path(__file__).resolve().parents[2] / "clinic"
    writers = [p for p in root.rglob("*.py") if "csv.writer(" in p.read_text() or "csv.DictWriter(" in p.read_text()]
    assert writers, "no CSV writer found (the scan would prove nothing)"
    for p in writers:
        text = p.read_text()
        assert "clinic.records.csv_cells import" in text and "lineterminator=LINE_END" in text, p


def test_the_supply_forecast_csv_neutralises_lots_and_names(monkeypatch):
    from datetime import date

    from clinic.supply import render

    doc = {"facilities": [{"facility": "f1", "name": "=Evil()", "products": [{
        "product": "+Anti-D", "vial_iu": 1500, "expected_vials": 1, "upper_vials": 2, "on_hand_vials": 3,
        "expiring_unused_vials": 0, "stockout_date": "", "order_vials": 0, "order_by": "", "weeks": []}]}],
        "transfers": [{"from": "f1", "from_name": "@x", "product": "-p", "vial_iu": 500, "lot": "=1+1",
                       "expiry": "2027-01-01", "vials": 1, "to": "f2", "arrives": str(date(2026, 6, 1))}]}
    monkeypatch.setattr(render, "to_dict", lambda rep: doc)
    cells = _cells(render.csv_text(None))
    assert "'=Evil()" in cells and "'+Anti-D" in cells and "'=1+1" in cells and "'@x" in cells
    assert not [c for c in cells if c[:1] in ("=", "+", "-", "@", "\t", "\r")]
