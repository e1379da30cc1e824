"""`rhledger forecast [--weeks] [--format json|csv] [--out FILE]` on a clinic's data directory."""
from __future__ import annotations

import csv
import io
import json

from click.testing import CliRunner

from clinic.cli.main import cli
from tests.web.conftest import app, booked, data_dir, days_ago, password_hash, store  # noqa: F401


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args], catch_exceptions=False)


def test_json_to_stdout(data_dir, booked):
    res = run("forecast", "--data", data_dir)
    assert res.exit_code == 0, res.output
    doc = json.loads(res.output)
    assert doc["weeks"] == 12 and doc["facilities"][0]["facility"] == "test-clinic"
    # the booked woman's routine dose opens in 56 days: one 1500 IU vial, nothing on hand
    [p] = doc["facilities"][0]["products"]
    assert (p["expected_vials"], p["on_hand_vials"], p["stockout_date"]) == (1.0, 0, days_ago(-56))


def test_csv_to_a_file(tmp_path, data_dir, booked):
    out = tmp_path / "sub" / "forecast.csv"
    # 9 weeks (days 0-62) reach the routine dose on day 56
    res = run("forecast", "--data", data_dir, "--weeks", 9, "--format", "csv", "--out", out)
    assert res.exit_code == 0, res.output
    assert "Wrote" in res.output and "1 facility, 1 stock-out ahead, 0 transfers suggested" in res.output
    rows = list(csv.DictReader(io.StringIO(out.read_text(encoding="utf-8"))))
    assert [r["record"] for r in rows] == ["product"] + ["week"] * 9
    assert not list(out.parent.glob(".*.tmp"))


def test_weeks_out_of_range_is_refused(data_dir):
    res = run("forecast", "--data", data_dir, "--weeks", 60)
    assert res.exit_code != 0 and "60 is not in the range 1<=x<=52" in res.output


def test_a_bad_supply_setting_is_a_clear_error(data_dir):
    cfg = data_dir / "config.toml"
    cfg.write_text(cfg.read_text(encoding="utf-8") + "\n[supply]\nlead_time_days = 400\n", encoding="utf-8")
    res = run("forecast", "--data", data_dir)
    assert res.exit_code == 1
    assert "supply.lead_time_days 400" in res.output and "from 0 to 180" in res.output
