"""Benchmark: a month of clinic bundles imported at the district, then the monthly report.

    python bench/bench_report.py [--facilities 5] [--pregnancies 120] [--keep DIR]

Builds a synthetic district with seed_demo.synthetic.build_synthetic (N facilities x M
pregnancies, bookings spread back in time), splits it into one signed bundle per facility
holding everything created or amended in the report month (what a clinic sends each
month), imports them into an empty district installation, and makes the month's report
(plans, indicators, 12-month trend) and each output. It does this for M and for 2M
pregnancies and prints the times and the ratios between the two runs, which say how the
work grows (1.0 x per doubling = constant, 2.0 x = linear) on this machine.

Prints figures; asserts nothing. The target scale is a district of 50 clinics x 2,000
bookings a year (about 8,300 bookings and some 60,000-80,000 records a month).
"""
from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def _district_dir(root: Path) -> Path:
    from seed_demo.synthetic import config_text

    d = root / "district"
    d.mkdir(parents=True)
    (d / "config.toml").write_text(config_text("bench-district"), encoding="utf-8")
    return d


def run(root: Path, facilities: int, pregnancies: int, now: datetime, month) -> dict:
    from clinic.reports import outputs
    from clinic.reports.bundle import encode_bundle, import_bundle
    from clinic.signing.keys import SigningKey
    from clinic.signing.trust import TrustEntry, TrustKey, TrustList
    from clinic.store import Store
    from seed_demo.synthetic import build_synthetic

    fig: dict = {"facilities": facilities, "pregnancies_per_facility": pregnancies}
    src = root / "source"
    t = time.perf_counter()
    built = build_synthetic(src, facilities, pregnancies, seed=7, now=now)
    fig["build_s"] = time.perf_counter() - t
    fig["records_total"] = built["records"]

    store = Store(src)
    start = month.start(store.tz).strftime("%Y-%m-%dT%H:%M:%SZ")
    by_fac: dict[str, list[dict]] = {}
    for r in store.iter_records(since=start):
        by_fac.setdefault(r["facility"], []).append(r)
    keys = {f: SigningKey.generate(f) for f in by_fac}
    trust = TrustList([TrustEntry(f, f, "clinic", "", (TrustKey(k.public_raw),)) for f, k in keys.items()])
    t = time.perf_counter()
    bundles = {f: encode_bundle(recs, key=keys[f], facility=f, since=start, until=now.strftime("%Y-%m-%dT%H:%M:%SZ"),
                                made_at=now.strftime("%Y-%m-%dT%H:%M:%SZ"), care=None)
               for f, recs in by_fac.items()}
    fig["encode_s"] = time.perf_counter() - t
    fig["month_records"] = sum(len(v) for v in by_fac.values())
    fig["bundle_bytes"] = sum(len(b) for b in bundles.values())

    dd = _district_dir(root)
    district = Store(dd)
    t = time.perf_counter()
    for f, data in bundles.items():
        res = import_bundle(district, dd, data, name=f"{f}.rhlb", trust=trust, now=now)
        assert res.status == "imported", res.message
    fig["import_s"] = time.perf_counter() - t
    t = time.perf_counter()
    for f, data in bundles.items():
        import_bundle(district, dd, data, name=f"{f}.rhlb", trust=trust, now=now)
    fig["reimport_s"] = time.perf_counter() - t   # the same bundles again: nothing changes

    # The report over the full synthetic store (a district that has imported every month so far).
    t = time.perf_counter()
    p = outputs.prepare(store, src, month, now=now)
    fig["report_s"] = time.perf_counter() - t
    fig["cases"] = len(p.cases)
    for fmt in ("csv", "json", "fhir", "pdf"):
        t = time.perf_counter()
        outputs.render_prepared(p, fmt)
        fig[f"{fmt}_s"] = time.perf_counter() - t
    return fig


def main(argv=None) -> int:
    from clinic.reports.month import Month

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--facilities", type=int, default=5)
    ap.add_argument("--pregnancies", type=int, default=120, help="per facility, first run (the second doubles it)")
    ap.add_argument("--keep", type=Path, default=None, help="keep the data under this directory")
    args = ap.parse_args(argv)
    now = datetime(2026, 12, 1, 9, 0, tzinfo=timezone.utc)
    month = Month(2026, 11)
    root = args.keep or Path(tempfile.mkdtemp(prefix="rhledger-bench-"))
    runs = []
    try:
        for k, m in enumerate((args.pregnancies, 2 * args.pregnancies)):
            fig = run(root / f"run{k}", args.facilities, m, now, month)
            runs.append(fig)
            print(
                f"run {k + 1}: {fig['facilities']} facilities x {m} pregnancies, {fig['records_total']:,} records; "
                f"month of {month}: {fig['month_records']:,} records in bundles of {fig['bundle_bytes'] / 1e6:.2f} MB"
            )
            print(
                f"  import {fig['import_s']:.2f} s "
                f"({1000 * fig['import_s'] / max(1, fig['month_records']):.2f} ms a record), "
                f"re-import {fig['reimport_s']:.2f} s, encode {fig['encode_s']:.2f} s"
            )
            print(
                f"  report {fig['report_s']:.2f} s over {fig['cases']:,} pregnancies "
                f"({1000 * fig['report_s'] / max(1, fig['cases']):.2f} ms a pregnancy); "
                f"csv {fig['csv_s']:.2f} s, json {fig['json_s']:.2f} s, "
                f"fhir {fig['fhir_s']:.2f} s, pdf {fig['pdf_s']:.2f} s"
            )
        a, b = runs
        print("ratios, run 2 / run 1 (data doubled):")
        for key in ("month_records", "import_s", "reimport_s", "cases", "report_s", "pdf_s"):
            print(f"  {key:<14} {b[key] / max(a[key], 1e-9):.2f} x")
        per_rec = b["import_s"] / max(1, b["month_records"])
        per_case = b["report_s"] / max(1, b["cases"])
        print(
            "extrapolated to 50 clinics x 2,000 bookings a year (about 70,000 records a month, "
            "about 100,000 pregnancies in a 12-month trend):"
        )
        print(f"  import {per_rec * 70_000:.0f} s, report {per_case * 100_000:.0f} s")
    finally:
        if args.keep is None:
            shutil.rmtree(root, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
