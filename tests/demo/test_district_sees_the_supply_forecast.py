"""On the demo, the district officer sees each clinic's anti-D forecast, Rusoka's stock-out date,
Ambeni's short-dated lot that would expire unused, and the transfer that saves it; and
downloads the CSV. Rusoka's own midwife sees the same stock-out at her clinic."""
from __future__ import annotations

import csv
import io
import shutil
from datetime import datetime, timezone

import pytest
from click.testing import CliRunner

from seed_demo.scenario import FACILITY_SITES
from seed_demo.sites import SITE_DEFS
from tests.web.conftest import csrf_of

SHORT_DATED = SITE_DEFS["clinic-a"].lots["short-dated"].lot      # Ambeni's 1500 IU lot expiring in 55 days
RUSOKA, AMBENI = SITE_DEFS["clinic-b"].facility_id, SITE_DEFS["clinic-a"].facility_id


@pytest.fixture(scope="module")
def district(demo, demo_dirs, tmp_path_factory):
    from clinic.reports.bundle import import_files
    from clinic.store import Store

    d = tmp_path_factory.mktemp("district-supply") / "district"
    shutil.copytree(demo_dirs["district"], d)
    results = import_files(Store(d), d, sorted((d / "demo-bundles").glob("*.rhlb")), now=None)
    assert all(r.status == "imported" for r in results)
    return d


@pytest.fixture(scope="module")
def report(district):
    from clinic.reports.supply import supply_report
    from clinic.store import Store

    return supply_report(Store(district), district, now=datetime.now(timezone.utc))


def test_every_clinic_has_a_forecast(report):
    assert {f.facility for f in report.facilities} == {SITE_DEFS[s].facility_id for s in FACILITY_SITES}
    for f in report.facilities:
        assert f.rows and f.expected_doses > 0, f.facility


def test_rusoka_runs_out_of_1500_iu_vials(report):
    [row] = [r for r in report.rows() if r.facility == RUSOKA and r.product.vial_iu == 1500]
    assert row.stock.stockout_date is not None and row.stock.order_vials > 0


def test_ambenis_short_dated_lot_would_expire_unused_and_moves_to_rusoka(report):
    [row] = [r for r in report.rows() if r.facility == AMBENI and r.product.vial_iu == 1500]
    [lot] = [o for o in row.stock.lots if o.lot == SHORT_DATED]
    assert lot.expiring_unused >= 1
    [t] = [t for t in report.transfers if t.lot == SHORT_DATED]
    assert (t.from_facility, t.to_facility) == (AMBENI, RUSOKA)
    assert t.arrives < t.expiry and t.vials == lot.expiring_unused
    # after the transfer nothing of that lot expires unused, and Rusoka's stock-out comes later
    assert [o.expiring_unused for o in row.after.lots if o.lot == SHORT_DATED] == [0]
    rusoka = report.row(RUSOKA, t.product)
    assert rusoka.after.stockout_date is None or rusoka.after.stockout_date > rusoka.stock.stockout_date


def _sign_in(app, user, password):
    c = app.test_client()
    token = csrf_of(c.get("/signin").get_data(as_text=True))
    r = c.post("/signin", data={"username": user, "password": password, "csrf_token": token})
    assert r.status_code == 302
    return c


def test_the_officer_sees_it_and_downloads_the_csv(district, report):
    from clinic.web import create_app

    app = create_app(district, test_config={"TESTING": True})
    c = _sign_in(app, "officer", "officer-demo")
    html = c.get("/supply/").get_data(as_text=True)
    for f in report.facilities:
        assert f.name in html
    assert "Suggested transfers" in html and SHORT_DATED in html and "confirm" in html.lower()
    stockout = report.row(RUSOKA, report.transfers[0].product).stock.stockout_date
    assert stockout.strftime("%a %d %b %Y") in html
    r = c.get("/supply/forecast.csv")
    assert r.status_code == 200 and r.mimetype == "text/csv"
    rows = list(csv.DictReader(io.StringIO(r.get_data(as_text=True))))
    transfers = [x for x in rows if x["record"] == "transfer"]
    assert [(x["from"], x["to"], x["lot"]) for x in transfers if x["lot"] == SHORT_DATED] == [(AMBENI, RUSOKA,
                                                                                              SHORT_DATED)]
    assert {x["facility"] for x in rows if x["record"] == "product"} == {f.facility for f in report.facilities}


def test_the_forecast_command_at_the_district(district, tmp_path):
    from clinic.cli.main import cli

    out = tmp_path / "forecast.csv"
    res = CliRunner().invoke(cli, ["forecast", "--data", str(district), "--format", "csv", "--out", str(out)],
                             catch_exceptions=False)
    assert res.exit_code == 0, res.output
    assert f",{SHORT_DATED}," in out.read_text(encoding="utf-8")


def test_rusokas_midwife_sees_her_stock_out(demo_dirs):
    from clinic.reports.supply import supply_report
    from clinic.store import Store

    d = demo_dirs["clinic-b"]
    rep = supply_report(Store(d), d, now=datetime.now(timezone.utc))
    assert [f.facility for f in rep.facilities] == [RUSOKA] and rep.transfers == []
    [row] = [r for r in rep.rows() if r.product.vial_iu == 1500]
    assert row.stock.stockout_date is not None
