"""District scale: one month's import into a district store, and what cold reads cost. Prints figures; asserts nothing.

Builds a synthetic district store directly on disk (its own generator below: invented
records, written as partition files and an index log, no Store calls), by default 50
facilities x 2,000 pregnancies x 12 records (1.2 million records), the state at the start of
a month. Then it generates that month's bundles: for each facility, every pregnancy with a
record made during the month, all its records (most unchanged, 10 % amended to version 2,
the month's new entries and bookings new): about 100,000 records from ~9,000 pregnancies.

Each measured phase runs in a fresh process (so memory figures are that phase's own):

    open (first)     Store(data_dir) on the freshly built store: verifies every partition parses
    open             Store(data_dir) again (the verification cache holds; the index is read)
    iter_records     open + every record once
    history          open + Store.history of 500 random pregnancies (cold partitions)
    merge_foreign    per-record merge_foreign of a sample (default 1,000 records of one facility)
    merge_foreign_many  the other facilities' bundles in one call
    open after       Store(data_dir) once more: the partitions the import wrote are not parsed again

The last lines compare per-record and bulk import per record (a ratio within one run).

    python bench/bench_district_store.py                           # full size: several minutes
    python bench/bench_district_store.py --facilities 10 --pregnancies 500 --sample 300   # quick
    python bench/bench_district_store.py --dir /tmp/district --keep   # keep the store to look at
"""
from __future__ import annotations

import argparse
import json
import os
import random
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timedelta, timezone
from pathlib import Path
from zoneinfo import ZoneInfo

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

NOW = datetime(2026, 11, 30, 12, 0, tzinfo=timezone.utc)
MONTH = timedelta(days=30)
TZ = "Africa/Nairobi"
PER_MONTH = 40  # bookings a facility a month
ENTRY_EVERY = timedelta(days=14)

CONFIG = f"""# Synthetic district benchmark (bench/bench_district_store.py). Invented; no real facility.
[facility]
id = "bench-district"
name = "Synthetic district"
kind = "district"
timezone = "{TZ}"

[care]
profile = "bsh-2014"

[stock]
products = [
  {{ name = "Anti-D 1500 IU (300 ug)", vial_iu = 1500, routes = ["IM", "IV"] }},
]
"""


# ---- the generator -------------------------------------------------------------------

def _utc(dt: datetime) -> str:
    return dt.strftime("%Y-%m-%dT%H:%M:%SZ")


def facility_id(f: int) -> str:
    return f"hc-{f:03d}"


def _env(rid, kind, fac, at, woman_id=None, pregnancy_id=None) -> dict:
    return {"id": rid, "kind": kind, "facility": fac, "woman_id": woman_id, "pregnancy_id": pregnancy_id,
            "created_at": _utc(at), "created_by": f"{fac}-midwife", "amended_at": None, "amended_by": None,
            "version": 1, "amendments": [], "origin": {"via": "bundle", "facility": fac, "issue": 1},
            "schema": 1, "voided": False, "voided_reason": None}


def _entry_fields(k: int, at: datetime, rng: random.Random) -> tuple[str, dict]:
    day = at.astimezone(ZoneInfo(TZ)).strftime("%Y-%m-%d")
    t = _utc(at - timedelta(hours=1))
    return [
        ("typing", {"abo": rng.choice(["A", "B", "O", "AB"]), "rhd": "negative", "tested_on": day,
                    "method": "tube", "lab": "District lab"}),
        ("partner_typing", {"rhd": rng.choice(["positive", "negative", "unknown"])}),
        ("screen", {"sampled_at": t, "result": "negative", "lab": "District lab"}),
        ("fetal_rhd", {"result": rng.choice(["positive", "negative"]), "sampled_on": day, "lab": "Ref lab"}),
        ("dose", {"given_at": t, "amount": 1500.0, "unit": "IU", "route": "IM", "product": "Anti-D 1500 IU (300 ug)",
                  "lot": f"L{rng.randint(100, 999)}", "lot_expiry": "2028-01-31", "indication": "routine-antenatal",
                  "given_by": "midwife", "dose_iu": 1500}),
        ("screen", {"sampled_at": t, "result": "negative"}),
        ("event", {"event_kind": "antepartum-haemorrhage", "occurred_at": t, "ongoing": False}),
        ("doppler", {"measured_at": t, "mca_psv_cm_s": round(rng.uniform(20, 60), 1)}),
        ("dose", {"given_at": t, "amount": 1500.0, "unit": "IU", "route": "IM", "lot": f"L{rng.randint(100, 999)}",
                  "lot_expiry": "2028-01-31", "indication": "sensitising-event", "given_by": "midwife",
                  "dose_iu": 1500}),
        ("referral", {"referred_on": day, "to_facility": "District hospital", "reason": "review"}),
    ][k]


def pregnancy_records(f: int, n: int, per_facility: int, seed: int) -> list[dict]:
    """Woman, pregnancy and up to 10 entries of pregnancy ``n`` of facility ``f``, oldest first,
    the ones made up to NOW (every value as the store holds it after validation)."""
    rng = random.Random(seed * 1_000_003 + f * 10_007 + n)
    fac = facility_id(f)
    booked = NOW - MONTH * ((per_facility - n) / PER_MONTH) + timedelta(hours=rng.randint(0, 40))
    booked = min(booked, NOW - timedelta(hours=1)).replace(microsecond=0)
    local_day = booked.astimezone(ZoneInfo(TZ)).date()
    wid, pid = f"{fac}-w{n:05d}", f"{fac}-p{n:05d}"
    woman = {**_env(wid, "woman", fac, booked), "name": f"Invented Woman {f}-{n}",
             "stated_age": 18 + n % 25, "village": f"Village {n % 40}", "register_no": f"ANC-{n:05d}"}
    preg = {**_env(pid, "pregnancy", fac, booked + timedelta(minutes=5), woman_id=wid),
            "booked_on": local_day.isoformat(), "lmp": (local_day - timedelta(days=70)).isoformat(),
            "gravidity": 1 + n % 3, "parity": n % 3, "status": "ongoing"}
    out = [woman, preg]
    for k in range(10):
        at = booked + timedelta(minutes=10) + ENTRY_EVERY * k
        if at > NOW:
            break
        kind, fields = _entry_fields(k, at, rng)
        out.append({**_env(f"{pid}-e{k}", kind, fac, at, woman_id=wid, pregnancy_id=pid), **fields})
    return out


def amended(rec: dict) -> dict:
    """The record as amended at its facility during the month (version 2)."""
    out = dict(rec)
    at = _utc(NOW - timedelta(days=3))
    field = {"woman": "village", "pregnancy": "prior_anti_d", "typing": "lab", "screen": "lab", "fetal_rhd": "lab",
             "dose": "product", "event": "notes", "referral": "question"}.get(rec["kind"])
    if field is None:
        return out
    out.update(version=2, amended_at=at, amended_by=f"{rec['facility']}-clerk", **{field: "amended this month"},
               amendments=[{"at": at, "by": f"{rec['facility']}-clerk", "reason": "corrected",
                            "changes": {field: {"old": rec.get(field), "new": "amended this month"}}}])
    return out


def month_bundle(f: int, per_facility: int, seed: int) -> list[dict]:
    """Facility ``f``'s records of the pregnancies active this month, as its bundle carries them."""
    cutoff = _utc(NOW - MONTH)
    out = []
    for n in range(per_facility):
        recs = pregnancy_records(f, n, per_facility, seed)
        if max(r["created_at"] for r in recs) < cutoff:
            continue
        rng = random.Random(n)
        out += [amended(r) if rng.random() < 0.1 else r for r in recs]
    return out


def build(data_dir: Path, facilities: int, per_facility: int, seed: int) -> dict:
    """Write the store as it stood a month before NOW (records made before the cutoff)."""
    cutoff = _utc(NOW - MONTH)
    tz = ZoneInfo(TZ)
    records_dir = data_dir / "records"
    records_dir.mkdir(parents=True)
    (data_dir / "config.toml").write_text(CONFIG, encoding="utf-8")
    (records_dir / "store.json").write_text(json.dumps({"schema": 1}))
    n_records = n_parts = 0
    with open(records_dir / "index.log", "w", encoding="utf-8") as index:
        for f in range(facilities):
            fac = facility_id(f)
            (records_dir / fac).mkdir()
            parts: dict[str, dict] = {}
            for n in range(per_facility):
                recs = [r for r in pregnancy_records(f, n, per_facility, seed) if r["created_at"] < cutoff]
                if len(recs) < 2:
                    continue
                woman, preg = recs[0], recs[1]
                created = datetime.strptime(woman["created_at"], "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=timezone.utc)
                wpart = f"{fac}/{created.astimezone(tz):%Y-%m}"
                ppart = f"{fac}/{preg['booked_on'][:7]}"
                for r in recs:
                    part = wpart if r["kind"] == "woman" else ppart
                    table = parts.setdefault(part, {})
                    table[str(len(table) + 1)] = r
                    index.write(f"{r['id']} {part} {r['kind']} {r['woman_id'] or '-'} {r['pregnancy_id'] or '-'}\n")
                    n_records += 1
            for part, table in parts.items():
                (records_dir / f"{part}.json").write_text(
                    json.dumps({"records": table}, ensure_ascii=False, separators=(",", ":")), encoding="utf-8")
                n_parts += 1
    return {"records": n_records, "partitions": n_parts}


# ---- phases (each in its own process) ---------------------------------------------------

def _rss_mb() -> float:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2**20


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # Linux: KiB


def phase(name: str, data_dir: Path, args) -> dict:
    from clinic.store import Store

    out: dict = {}
    if name in ("open-first", "open", "open-after"):
        t = time.perf_counter()
        Store(data_dir)
        out["seconds"] = time.perf_counter() - t
    elif name == "iter":
        t = time.perf_counter()
        s = Store(data_dir)
        n = sum(1 for _ in s.iter_records())
        out.update(seconds=time.perf_counter() - t, records=n)
    elif name == "history":
        rng = random.Random(args.seed)
        t = time.perf_counter()
        s = Store(data_dir)
        opened = time.perf_counter()
        ids = [f"{facility_id(rng.randrange(args.facilities))}-p{rng.randrange(args.pregnancies - 200):05d}"
               for _ in range(500)]
        n = sum(len(s.history(pid)[2]) for pid in ids)
        out.update(seconds=time.perf_counter() - t, per_call_ms=(time.perf_counter() - opened) / 500 * 1000,
                   entries=n)
    elif name in ("single", "bulk"):
        s = Store(data_dir)
        if name == "single":
            whole = month_bundle(0, args.pregnancies, args.seed)  # a random sample keeps the bundle's mix
            keep = set(random.Random(args.seed).sample(range(len(whole)), min(args.sample, len(whole))))
            batch = [r for i, r in enumerate(whole) if i in keep]
        else:
            batch = [r for f in range(1, args.facilities) for r in month_bundle(f, args.pregnancies, args.seed)]
        out["rss_before_mb"] = _rss_mb()
        t = time.perf_counter()
        if name == "single":
            outcomes = [s.merge_foreign(r, by="import:bundle", now=NOW) for r in batch]
        else:
            outcomes = s.merge_foreign_many(batch, by="import:bundle", now=NOW)
        out.update(seconds=time.perf_counter() - t, records=len(batch),
                   outcomes={o: outcomes.count(o) for o in sorted(set(outcomes))})
    out["peak_mb"] = _peak_mb()
    return out


def run_phase(name: str, data_dir: Path, args) -> dict:
    cmd = [sys.executable, __file__, "--phase", name, "--dir", str(data_dir),
           "--facilities", str(args.facilities), "--pregnancies", str(args.pregnancies),
           "--sample", str(args.sample), "--seed", str(args.seed)]
    res = subprocess.run(cmd, capture_output=True, text=True, check=False)
    if res.returncode != 0:
        raise SystemExit(f"phase {name} failed:\n{res.stderr}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def self_check(args) -> None:
    """The generator's records must be what validation makes of them (else 'unchanged' lies)."""
    from clinic.store import Store, fields_of

    with tempfile.TemporaryDirectory() as tmp:
        (Path(tmp) / "config.toml").write_text(CONFIG, encoding="utf-8")
        s = Store(tmp)
        for r in pregnancy_records(0, args.pregnancies - 1, args.pregnancies, args.seed) + \
                pregnancy_records(0, 0, args.pregnancies, args.seed):
            canon = s.check_foreign(r, NOW)
            if fields_of(canon) != fields_of(r):
                raise SystemExit(f"generator bug: {r['kind']} {fields_of(r)} != {fields_of(canon)}")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--facilities", type=int, default=50)
    ap.add_argument("--pregnancies", type=int, default=2000, help="per facility")
    ap.add_argument("--sample", type=int, default=1000, help="records merged one by one")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--dir", type=Path, help="where to build (default: a temp dir)")
    ap.add_argument("--keep", action="store_true", help="keep the built store")
    ap.add_argument("--phase", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.phase:
        print(json.dumps(phase(args.phase, args.dir, args)))
        return 0

    self_check(args)
    base = args.dir or Path(tempfile.mkdtemp(prefix="rhledger-district-"))
    data_dir = base / "store"
    if data_dir.exists():
        shutil.rmtree(data_dir)
    t = time.perf_counter()
    built = build(data_dir, args.facilities, args.pregnancies, args.seed)
    size = sum(p.stat().st_size for p in (data_dir / "records").rglob("*.json"))
    index_size = (data_dir / "records" / "index.log").stat().st_size
    print(f"built {built['records']:,} records in {built['partitions']:,} partitions "
          f"({size / 2**20:,.0f} MiB, index {index_size / 2**20:,.0f} MiB) in {time.perf_counter() - t:.1f} s "
          f"[{args.facilities} facilities x {args.pregnancies} pregnancies]")
    rows = []
    for name, label in (("open-first", "open (first: verifies all)"), ("open", "open"),
                        ("iter", "open + iter_records (all)"), ("history", "open + 500 x history"),
                        ("single", f"merge_foreign x {args.sample}"), ("bulk", "merge_foreign_many"),
                        ("open-after", "open after the import")):
        r = run_phase(name, data_dir, args)
        rows.append((name, r))
        extra = {k: v for k, v in r.items() if k not in ("seconds", "peak_mb")}
        extra_text = "  ".join(f"{k}={v:.2f}" if isinstance(v, float) else f"{k}={v}" for k, v in extra.items())
        print(f"{label:<30} {r['seconds']:9.2f} s   peak {r['peak_mb']:7.0f} MiB   {extra_text}", flush=True)
    res = dict(rows)
    single = res["single"]["seconds"] / res["single"]["records"]
    bulk = res["bulk"]["seconds"] / res["bulk"]["records"]
    print(f"per record: merge_foreign {single * 1000:.2f} ms, merge_foreign_many {bulk * 1000:.3f} ms "
          f"-> ratio {single / bulk:.0f}x")
    def per_written(r):
        return r["seconds"] / max(1, r["outcomes"].get("created", 0) + r["outcomes"].get("updated", 0))
    print(f"per record written (created or updated): merge_foreign {per_written(res['single']) * 1000:.2f} ms, "
          f"merge_foreign_many {per_written(res['bulk']) * 1000:.3f} ms "
          f"-> ratio {per_written(res['single']) / per_written(res['bulk']):.0f}x")
    print(f"one month of {args.facilities - 1} facilities ({res['bulk']['records']:,} records) one by one would take "
          f"~{single * res['bulk']['records']:.0f} s; in one call it took {res['bulk']['seconds']:.1f} s")
    if not args.keep:
        shutil.rmtree(base if args.dir is None else data_dir)
    return 0


if __name__ == "__main__":
    sys.exit(main())
