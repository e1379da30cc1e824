"""The district laptop: a month's bundles from every clinic imported, then the monthly report
with its 12-month trend.

A synthetic district (``seed_demo.synthetic``: ``facilities`` clinics x ``per_facility``
bookings, all within the last twelve months, so every one counts in the trend; at the full
size 50 x 2,000 = 100,000 bookings) is split at the start of the report month: what was made
or changed before it is already in the district store (written with the bulk path), what was
made or changed during it travels in one signed bundle per clinic (with its care header), as
the clinics send them. Then, each in a fresh process:

* **import**: every bundle through ``clinic.reports.bundle.import_bundle`` (signature, body
  hash, every record checked, then merged);
* **report**: ``clinic.reports.outputs.prepare`` for the month (every pregnancy planned, the
  month and its 12-month trend counted), as the district page and ``rhledger report`` make it;
* **report again**: the same, an hour later, in another fresh process (what a second look
  at the page, or a download of the CSV, costs).
"""
from __future__ import annotations

import json
import time
from datetime import datetime, timedelta, timezone
from pathlib import Path

from bench.common import disk_bytes, peak_rss_mib, run_phase

NOW = datetime(2026, 12, 1, 9, 0, tzinfo=timezone.utc)
REPORT_MONTH = (2026, 11)
BATCH = 20_000


def _utc(t: datetime) -> str:
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


def build(root: Path, facilities: int, per_facility: int, log) -> dict:
    """The district store before the month, and the month's bundles (in ``root``/bundles)."""
    from clinic.reports.bundle import care_of, encode_bundle
    from clinic.reports.month import Month
    from clinic.signing.keys import SigningKey
    from clinic.signing.trust import TrustEntry, TrustKey, TrustList
    from clinic.store import Store
    from seed_demo import synthetic

    dd = root / "district"
    synthetic.prepare(dd, force=True)
    store = Store(dd)
    start = _utc(Month(*REPORT_MONTH).start(store.tz))
    per_month = -(-per_facility // 12)
    before: list[dict] = []
    month: dict[str, list[dict]] = {}
    n_before = n_pregnancies = 0
    t = time.perf_counter()
    for calls in synthetic.iter_calls(facilities, per_facility, 11, NOW, per_month=per_month):
        n_pregnancies += 1
        for r in synthetic.stored_records(calls):
            if max(r["created_at"], r.get("amended_at") or "") < start:
                before.append(r)
            else:
                month.setdefault(r["facility"], []).append(r)
        if len(before) >= BATCH:
            store.merge_foreign_many(before, by="synthetic", now=NOW)
            n_before += len(before)
            before.clear()
    store.merge_foreign_many(before, by="synthetic", now=NOW)
    n_before += len(before)
    log(f"  district store before the month: {n_before:,} records of {n_pregnancies:,} bookings "
        f"in {time.perf_counter() - t:.0f} s")
    keys = {f: SigningKey.generate(f) for f in month}
    trust = TrustList([TrustEntry(f, f, "clinic", "", (TrustKey(k.public_raw),)) for f, k in keys.items()])
    care = care_of(store.settings)
    bdir = root / "bundles"
    bdir.mkdir(exist_ok=True)
    for f, recs in month.items():
        data = encode_bundle(recs, key=keys[f], facility=f, since=start, until=_utc(NOW), made_at=_utc(NOW),
                             care=care)
        (bdir / f"{f}.rhlb").write_bytes(data)
    (bdir / "trust.json").write_bytes(_trust_bytes(trust))
    return {"bookings": n_pregnancies, "records_before": n_before, "bundles": len(month),
            "bundle_records": sum(len(v) for v in month.values()),
            "bundle_bytes": disk_bytes(bdir) - (bdir / "trust.json").stat().st_size}


def _trust_bytes(trust) -> bytes:
    """The clinics' public keys, for the import phase (a fresh process)."""
    return json.dumps({e.facility_id: e.keys[0].public_raw.hex() for e in trust.entries}).encode()


def _trust_from(path: Path):
    from clinic.signing.trust import TrustEntry, TrustKey, TrustList

    keys = json.loads(path.read_bytes())
    return TrustList([TrustEntry(f, f, "clinic", "", (TrustKey(bytes.fromhex(k)),)) for f, k in keys.items()])


def phase(name: str, args: dict) -> dict:
    from clinic.store import Store

    root = Path(args["root"])
    dd = root / "district"
    if name == "import":
        from clinic.reports.bundle import import_bundle

        trust = _trust_from(root / "bundles" / "trust.json")
        store = Store(dd)
        t = time.perf_counter()
        outcomes: dict[str, int] = {}
        for p in sorted((root / "bundles").glob("*.rhlb")):
            res = import_bundle(store, dd, p.read_bytes(), name=p.name, trust=trust, now=NOW)
            if res.status != "imported":
                raise RuntimeError(res.message)
            for k, v in res.outcomes.items():
                outcomes[k] = outcomes.get(k, 0) + v
        return {"seconds": time.perf_counter() - t, "outcomes": outcomes, "peak_mib": peak_rss_mib()}
    if name == "report":
        from clinic.reports import outputs
        from clinic.reports.month import Month

        now = NOW + timedelta(hours=float(args.get("later_h", 0)))
        t = time.perf_counter()
        store = Store(dd)
        opened = time.perf_counter() - t
        p = outputs.prepare(store, dd, Month(*REPORT_MONTH), now=now)
        seconds = time.perf_counter() - t
        return {"seconds": seconds, "open_s": opened, "cases": len(p.cases), "peak_mib": peak_rss_mib()}
    raise ValueError(name)


def run(root: Path, facilities: int, per_facility: int, log) -> dict:
    out = build(root, facilities, per_facility, log)
    imp = run_phase("part_district", "import", {"root": str(root)})
    out.update(import_s=imp["seconds"], import_outcomes=imp["outcomes"], import_peak_mib=imp["peak_mib"])
    log(f"  import of {out['bundles']} bundles ({out['bundle_records']:,} records): {imp['seconds']:.1f} s")
    rep = run_phase("part_district", "report", {"root": str(root)})
    out.update(report_s=rep["seconds"], report_cases=rep["cases"], report_peak_mib=rep["peak_mib"],
               report_open_s=rep["open_s"])
    log(f"  report over {rep['cases']:,} pregnancies: {rep['seconds']:.1f} s (peak {rep['peak_mib']:.0f} MiB)")
    again = run_phase("part_district", "report", {"root": str(root), "later_h": 1})
    out.update(report_again_s=again["seconds"])
    log(f"  the report again an hour later: {again['seconds']:.1f} s")
    out["facilities"], out["per_facility"] = facilities, per_facility
    return out
