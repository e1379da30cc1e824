"""The store at 1,000 / 10,000 / 100,000 pregnancies, beside SQLite doing the same writes.

At each size a synthetic store is built (``seed_demo.synthetic.build_synthetic``: the bulk
path, spread over ``facilities`` clinics booking 40 a month each, so every monthly partition
is as full as a real clinic's), then:

* **entry**: ``Store.create`` of one antibody screen into one of the newest pregnancies
  (what a midwife saves), timed one by one; each is durable (fsync'd) before it returns;
* **sqlite**: the same record (same JSON) into a SQLite copy of the same records (Python's
  sqlite3, WAL, synchronous=FULL): look the pregnancy up, insert the record and its audit row,
  one commit per entry. The two writes alternate, so both see the same moments of a busy
  machine: compare them within one run;
* **open**: ``Store(data_dir)`` in a fresh process, after the store's files were dropped from
  the page cache (cold; three times, the median kept) and once straight after (warm); its time
  and the process's peak memory (the largest of the three);
* **disk**: bytes of ``records/`` and ``audit/`` (and of the SQLite file) per pregnancy.
"""
from __future__ import annotations

import json
import random
import shutil
import sqlite3
import time
from datetime import datetime, timedelta, timezone
from pathlib import Path

from bench.common import disk_bytes, drop_page_cache, peak_rss_mib, percentile, rss_mib, run_phase

FACILITIES = 10
PER_MONTH = 40
WARMUP = 10
OPENS = 3  # cold opens at each size: the median is reported


def phase(name: str, args: dict) -> dict:
    """Run in a fresh process by ``run_phase``."""
    if name != "open":
        raise ValueError(name)
    before = rss_mib()
    from clinic.store import Store

    imported = rss_mib()
    t = time.perf_counter()
    store = Store(args["dir"])
    seconds = time.perf_counter() - t
    t = time.perf_counter()
    n = len(store.pregnancies()) if args.get("count") else None
    return {"seconds": seconds, "peak_mib": peak_rss_mib(), "rss_start_mib": before,
            "rss_after_import_mib": imported, "rss_after_open_mib": rss_mib(), "pregnancies": n,
            "count_s": time.perf_counter() - t if n is not None else None}


# ---- the SQLite copy -------------------------------------------------------------------------

SCHEMA = """
CREATE TABLE records (id TEXT PRIMARY KEY, kind TEXT NOT NULL, facility TEXT NOT NULL, woman_id TEXT,
                      pregnancy_id TEXT, created_at TEXT NOT NULL, body TEXT NOT NULL);
CREATE INDEX records_pregnancy ON records (pregnancy_id);
CREATE TABLE audit (n INTEGER PRIMARY KEY, at TEXT NOT NULL, record_id TEXT NOT NULL, body TEXT NOT NULL);
"""


def sqlite_copy(store, path: Path) -> sqlite3.Connection:
    """A SQLite database holding the store's records (and one audit row each), WAL, synchronous=FULL."""
    if path.exists():
        path.unlink()
    db = sqlite3.connect(path, isolation_level=None)
    db.execute("PRAGMA journal_mode=WAL")
    db.execute("PRAGMA synchronous=FULL")
    db.executescript(SCHEMA)
    db.execute("BEGIN")
    for r in store.iter_records():
        body = json.dumps(r, ensure_ascii=False, separators=(",", ":"))
        db.execute("INSERT INTO records VALUES (?,?,?,?,?,?,?)",
                   (r["id"], r["kind"], r["facility"], r.get("woman_id"), r.get("pregnancy_id"), r["created_at"], body))
        db.execute("INSERT INTO audit (at, record_id, body) VALUES (?,?,?)", (r["created_at"], r["id"], body))
    db.execute("COMMIT")
    db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return db


def sqlite_entry(db: sqlite3.Connection, record: dict) -> None:
    """What Store.create does, the SQLite way: the parent looked up, record and audit row, one commit."""
    db.execute("BEGIN IMMEDIATE")
    row = db.execute("SELECT woman_id FROM records WHERE id = ? AND kind = 'pregnancy'",
                     (record["pregnancy_id"],)).fetchone()
    if row is None:
        db.execute("ROLLBACK")
        raise LookupError(record["pregnancy_id"])
    body = json.dumps(record, ensure_ascii=False, separators=(",", ":"))
    db.execute("INSERT INTO records VALUES (?,?,?,?,?,?,?)",
               (record["id"], record["kind"], record["facility"], record["woman_id"], record["pregnancy_id"],
                record["created_at"], body))
    db.execute("INSERT INTO audit (at, record_id, body) VALUES (?,?,?)", (record["created_at"], record["id"], body))
    db.execute("COMMIT")


# ---- one size ----------------------------------------------------------------------------------

def measure_size(root: Path, size: int, sample: int, now: datetime, log) -> dict:
    from clinic.store import Store
    from seed_demo.synthetic import build_synthetic

    d = root / f"store-{size}"
    per_facility = max(1, size // FACILITIES)
    t = time.perf_counter()
    built = build_synthetic(d, FACILITIES, per_facility, seed=1, now=now, per_month=PER_MONTH, force=True)
    build_s = time.perf_counter() - t
    pregnancies = built["pregnancies"]
    log(f"  store {pregnancies:,} pregnancies: built {built['records']:,} records in {build_s:.0f} s")
    out: dict = {"pregnancies": pregnancies, "records": built["records"], "build_s": round(build_s, 1)}
    store_bytes = disk_bytes(d / "records", d / "audit")
    out["disk_bytes"] = store_bytes
    out["bytes_per_pregnancy"] = round(store_bytes / pregnancies)
    out["index_bytes"] = (d / "records" / "index.log").stat().st_size

    colds = []
    for _ in range(OPENS):
        drop_page_cache(d)
        colds.append(run_phase("part_store", "open", {"dir": str(d)}))
    warm = run_phase("part_store", "open", {"dir": str(d)})
    cold = sorted(colds, key=lambda r: r["seconds"])[len(colds) // 2]
    out.update(open_cold_s=cold["seconds"], open_peak_mib=max(r["peak_mib"] for r in colds),
               open_rss_after_import_mib=cold["rss_after_import_mib"], open_warm_s=warm["seconds"],
               open_cold_all_s=[round(r["seconds"], 3) for r in colds])

    store = Store(d)
    db = sqlite_copy(store, root / f"sqlite-{size}.db")
    newest = [p for p in store.pregnancies()][-max(2 * sample, 50):]
    rng = random.Random(size)
    store_ms, sqlite_ms = [], []
    at = now
    for i in range(sample + WARMUP):
        preg = rng.choice(newest)
        at = at + timedelta(seconds=1)
        t = time.perf_counter()
        created = store.create("screen", {"sampled_at": (at - timedelta(minutes=30)).strftime("%Y-%m-%dT%H:%M:%SZ"),
                                          "result": "negative"}, by="bench", facility=preg["facility"],
                               woman_id=preg["woman_id"], pregnancy_id=preg["id"], now=at)
        a = time.perf_counter() - t
        twin = dict(created.record, id=f"sqlite-{i}-{created.record['id']}")
        t = time.perf_counter()
        sqlite_entry(db, twin)
        b = time.perf_counter() - t
        if i >= WARMUP:
            store_ms.append(1000 * a)
            sqlite_ms.append(1000 * b)
    db.close()
    sq = root / f"sqlite-{size}.db"
    sqlite_bytes = disk_bytes(sq) + sum(disk_bytes(p) for p in sq.parent.glob(sq.name + "-*"))
    out.update(entry_p50_ms=percentile(store_ms, 50), entry_p95_ms=percentile(store_ms, 95),
               sqlite_p50_ms=percentile(sqlite_ms, 50), sqlite_p95_ms=percentile(sqlite_ms, 95),
               entries_timed=len(store_ms), sqlite_bytes_per_pregnancy=round(sqlite_bytes / pregnancies))
    out["ratio_to_sqlite"] = out["entry_p95_ms"] / out["sqlite_p95_ms"]
    log(f"  store {pregnancies:,}: entry p50 {out['entry_p50_ms']:.1f} ms p95 {out['entry_p95_ms']:.1f} ms; "
        f"sqlite p95 {out['sqlite_p95_ms']:.1f} ms; open cold {out['open_cold_s']:.2f} s, "
        f"peak {out['open_peak_mib']:.0f} MiB; {out['bytes_per_pregnancy']:,} B a pregnancy")
    return out


def run(root: Path, sizes: list[int], sample: int, log, keep: bool = False) -> dict:
    now = datetime.now(timezone.utc).replace(microsecond=0)
    by_size = {}
    for size in sizes:
        by_size[str(size)] = measure_size(root, size, sample, now, log)
        if not keep:
            shutil.rmtree(root / f"store-{size}", ignore_errors=True)
            for p in root.glob(f"sqlite-{size}.db*"):
                p.unlink()
    first, last = by_size[str(sizes[0])], by_size[str(sizes[-1])]
    return {
        "facilities": FACILITIES, "bookings_per_facility_month": PER_MONTH, "entries_timed_per_size": sample,
        "sizes": by_size,
        "entry_p50_ms": {k: v["entry_p50_ms"] for k, v in by_size.items()},
        "entry_p95_ms": {k: v["entry_p95_ms"] for k, v in by_size.items()},
        "sqlite_p95_ms": {k: v["sqlite_p95_ms"] for k, v in by_size.items()},
        "ratio_to_sqlite": {k: v["ratio_to_sqlite"] for k, v in by_size.items()},
        "flatness": last["entry_p95_ms"] / first["entry_p95_ms"],
        "open_cold_s": {k: v["open_cold_s"] for k, v in by_size.items()},
        "open_peak_mib": {k: v["open_peak_mib"] for k, v in by_size.items()},
        "bytes_per_pregnancy": {k: v["bytes_per_pregnancy"] for k, v in by_size.items()},
    }
