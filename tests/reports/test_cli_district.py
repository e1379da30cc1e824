"""The command line: rhledger export, import, report and stock, with clear errors."""
from __future__ import annotations

import csv
import io
import json

import pytest
from click.testing import CliRunner

from clinic.cli.main import cli
from tests.reports import dataset as ds

AS_OF = "2026-12-01T12:00:00Z"


@pytest.fixture
def district(tmp_path, clinics):
    d = tmp_path / "district"
    ds.write_config(d, ds.DISTRICT_ID, "Invented District", "district")
    ds.install_trust(d, {f: clinics.dir(f) for f in (ds.A, ds.B)})
    return d


def run(*args):
    res = CliRunner().invoke(cli, [str(a) for a in args], catch_exceptions=False)
    return res


def export(clinics, fid, out):
    res = run("export", "--data", clinics.dir(fid), "--out", out, "--as-of", AS_OF)
    assert res.exit_code == 0, res.output
    return out


@pytest.mark.slow
def test_export_import_report_from_the_command_line(tmp_path, clinics, district):
    a = export(clinics, ds.A, tmp_path / "a.rhlb")
    b = export(clinics, ds.B, tmp_path / "b.rhlb")
    res = run("import", "--data", district, a, b, "--as-of", AS_OF)
    assert res.exit_code == 0, res.output
    assert res.output.count("OK") == 2
    out = tmp_path / "nov.json"
    res = run("report", "--data", district, "--month", "2026-11", "--format", "json", "--out", out, "--as-of", AS_OF)
    assert res.exit_code == 0, res.output
    doc = json.loads(out.read_text())
    # hand-worked in test_coverage_indicators: 6 routine doses closed, 3 on time
    assert doc["district"]["indicators"]["routine_on_time"] == {
        "numerator": 3, "denominator": 6, "percentage": 50.0, "outcomes": {"late": 1, "not-given": 2, "on-time": 3}}
    assert doc["facilities"][ds.A]["name"] == "Invented Clinic A"   # names from the trust list
    for fmt in ("csv", "fhir", "fhir-records", "follow-up", "pdf"):
        res = run("report", "--data", district, "--month", "2026-11", "--format", fmt,
                  "--out", tmp_path / f"nov.{fmt}", "--as-of", AS_OF)
        assert res.exit_code == 0, res.output
    names = {r["name"] for r in csv.DictReader(io.StringIO((tmp_path / "nov.follow-up").read_text()))}
    assert {"Grace Test-Routine-Missed", "Rehema Test-Event-None", "Sauda Test-Baby-Untyped"} <= names
    assert (tmp_path / "nov.pdf").read_bytes()[:5] == b"%PDF-"


def test_export_since_last_is_incremental(tmp_path, clinics):
    export(clinics, ds.A, tmp_path / "a1.rhlb")
    res = run("export", "--data", clinics.dir(ds.A), "--out", tmp_path / "a2.rhlb", "--as-of", AS_OF)
    assert res.exit_code == 0 and ": 0 records" in res.output


def test_import_refuses_a_tampered_bundle_and_exits_non_zero(tmp_path, clinics, district):
    a = export(clinics, ds.A, tmp_path / "a.rhlb")
    data = bytearray(a.read_bytes())
    data[len(data) // 2] ^= 0xFF
    bad = tmp_path / "bad.rhlb"
    bad.write_bytes(bytes(data))
    res = run("import", "--data", district, bad, "--as-of", AS_OF)
    assert res.exit_code == 1
    assert "REFUSED" in res.output and "nothing of them imported" in res.output
    from clinic.store import Store
    assert list(Store(district).iter_records()) == []


def test_report_with_a_bad_month_says_how_to_write_it(tmp_path, district):
    res = run("report", "--data", district, "--month", "Nov-2026", "--format", "csv", "--out", tmp_path / "x.csv")
    assert res.exit_code == 1 and "YYYY-MM" in res.output


def test_stock_ledger_commands(tmp_path, clinics):
    d = clinics.dir(ds.A)
    res = run("stock", "add", "--data", d, "--move", "discarded", "--product", "Anti-D 1500 IU", "--vial-iu", 1500,
              "--lot", "A-LOT-2", "--expiry", "2027-01-15", "--vials", 1, "--by", "midwife", "--notes", "vial cracked")
    assert res.exit_code == 0, res.output
    res = run("stock", "show", "--data", d, "--json")
    lots = {r["lot"]: r for r in json.loads(res.output)}
    # A-LOT-1: 20 + 50 received - 2 cold chain - 5 given = 63; A-LOT-2: 10 - 1 discarded = 9
    assert lots["A-LOT-1"]["vials"] == 63 and lots["A-LOT-2"]["vials"] == 9
    res = run("stock", "add", "--data", d, "--move", "received", "--product", "X", "--vial-iu", 5,
              "--lot", "L", "--expiry", "2027-01-15", "--vials", 1, "--by", "midwife")
    assert res.exit_code == 1 and "vial_iu" in res.output


def test_every_district_command_has_help_text():
    for name in ("export", "import", "import-log", "report", "stock"):
        assert cli.commands[name].help
