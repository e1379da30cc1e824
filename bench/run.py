"""Every performance figure of rhledger in one command. Prints a table; asserts nothing.

    python bench/run.py --quick                 # smaller sizes, under two minutes
    python bench/run.py --json bench.json       # the full sizes (long: see bench/README.md)
    python bench/run.py --parts store,card      # only some parts

Parts: store (entry writes beside SQLite, cold open, bytes on disk), worklist (one clinic with
2,000 ongoing pregnancies: engine and HTTP page), district (50 monthly bundles imported, the
report with its 12-month trend), card (PDF, sign, verify, payload size, worn-photo reading),
web (bytes of the first and a repeat load in Chromium). bench/README.md gives the meaning of
every JSON key and the targets.

The machine is usually shared: figures are noisy, so compare ratios measured in one run.
"""
from __future__ import annotations

import argparse
import json
import shutil
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from bench.common import machine  # noqa: E402
from bench.part_card import SITES as CARD_SITES  # noqa: E402

PARTS = ("store", "worklist", "district", "card", "web")
FULL = {"store_sizes": [1_000, 10_000, 100_000], "store_sample": 200, "worklist_pregnancies": 2_000,
        "district_facilities": 50, "district_per_facility": 2_000, "card_sites": list(CARD_SITES), "repeat": 10}
QUICK = {"store_sizes": [1_000, 5_000], "store_sample": 40, "worklist_pregnancies": 2_000,
         "district_facilities": 10, "district_per_facility": 200, "card_sites": ["clinic-a"], "repeat": 3}

# Targets of issue 10 (a benchmark, not a timed test): key -> (limit, "max" or "min", words).
TARGETS = {
    "store.ratio_to_sqlite": (3.0, "entry p95 at most 3x SQLite's, same run"),
    "store.flatness": (1.5, "entry p95 at the largest size / at 1,000"),
    "worklist_ms.engine": (200.0, "worklist of 2,000 ongoing pregnancies (engine)"),
    "worklist_ms.http": (200.0, "worklist page over HTTP"),
    "district.report_s": (5.0, "district report, 100,000 bookings, 12-month trend"),
    "district.import_s": (10.0, "50 monthly bundles imported"),
    "store.open_cold_s.district": (1.0, "cold open at district size"),
    "store.open_peak_mib.district": (200.0, "peak memory of that open"),
    "card.pdf_s": (1.0, "one card PDF"),
    "web.first_load_kb": (300.0, "sign-in plus the first page, compressed"),
}


def log(msg: str) -> None:
    print(msg, file=sys.stderr, flush=True)


def _phase(spec: str, args_json: str) -> int:
    import importlib

    part, name = spec.split(":", 1)
    mod = importlib.import_module(f"bench.{part}")
    print(json.dumps(mod.phase(name, json.loads(args_json))))
    return 0


def run_parts(parts: list[str], cfg: dict, root: Path, keep: bool) -> dict:
    out: dict = {}
    for part in parts:
        t = time.perf_counter()
        log(f"[{part}]")
        if part == "store":
            from bench import part_store

            out["store"] = part_store.run(root, cfg["store_sizes"], cfg["store_sample"], log, keep)
        elif part == "worklist":
            from bench import part_worklist

            out["worklist_ms"] = part_worklist.run(root, cfg["worklist_pregnancies"], log, cfg["repeat"])
        elif part == "district":
            from bench import part_district

            out["district"] = part_district.run(root, cfg["district_facilities"], cfg["district_per_facility"], log)
        elif part == "card":
            from bench import part_card

            out["card"] = part_card.run(root, log, sites=cfg["card_sites"], repeat=cfg["repeat"])
        elif part == "web":
            from bench import part_web

            out["web"] = part_web.run(root, log)
        out.setdefault("seconds", {})[part] = round(time.perf_counter() - t, 1)
    return out


def lookup(figures: dict, key: str):
    """A figure by dotted key; ``.district`` means the largest store size measured."""
    node = figures
    parts = key.split(".")
    for i, k in enumerate(parts):
        if not isinstance(node, dict):
            return None
        if k == "district" and i == len(parts) - 1 and k not in node:
            sizes = [int(s) for s in node]
            return node[str(max(sizes))] if sizes else None
        node = node.get(k)
    return node


def table(figures: dict) -> list[str]:
    rows = []

    def row(name, value, unit="", target=None):
        v = "-" if value is None else (f"{value:,.2f}" if isinstance(value, float) else f"{value:,}")
        rows.append(f"{name:<52} {v:>12} {unit:<5} {target or ''}")

    st = figures.get("store")
    if st:
        for size, s in st["sizes"].items():
            row(f"store {int(size):,} pregnancies: entry p50", s["entry_p50_ms"], "ms")
            row(f"store {int(size):,} pregnancies: entry p95", s["entry_p95_ms"], "ms")
            row(f"store {int(size):,} pregnancies: SQLite p95", s["sqlite_p95_ms"], "ms")
            row(f"store {int(size):,} pregnancies: ratio to SQLite (p95)", s["ratio_to_sqlite"], "x", "<= 3")
            row(f"store {int(size):,} pregnancies: cold open", s["open_cold_s"], "s")
            row(f"store {int(size):,} pregnancies: peak memory of the open", s["open_peak_mib"], "MiB")
            row(f"store {int(size):,} pregnancies: bytes on disk a pregnancy", s["bytes_per_pregnancy"], "B")
        row("store flatness (p95 largest / p95 at 1,000)", st["flatness"], "x", "<= 1.5")
    wl = figures.get("worklist_ms")
    if wl:
        row(f"worklist, {wl['pregnancies']:,} ongoing: engine", wl["engine"], "ms", "<= 200")
        row(f"worklist, {wl['pregnancies']:,} ongoing: HTTP page", wl["http"], "ms", "<= 200")
    di = figures.get("district")
    if di:
        row(f"district import, {di['bundles']} monthly bundles ({di['bundle_records']:,} records)",
            di["import_s"], "s", "<= 10")
        row(f"district report, {di['bookings']:,} bookings, 12-month trend", di["report_s"], "s", "<= 5")
        if di.get("report_again_s") is not None:
            row("district report again (same records, later)", di["report_again_s"], "s")
    ca = figures.get("card")
    if ca:
        row("card PDF (largest demo history)", ca["pdf_s"], "s", "<= 1")
        row("card encode + sign", ca["encode_sign_ms"], "ms")
        row("card decode + verify", ca["decode_verify_ms"], "ms")
        row("card payload, typical demo history", ca["payload_chars"]["typical"], "chars")
        row("card payload, largest demo history", ca["payload_chars"]["largest"], "chars")
        ph = ca["worn_photo"]
        row(f"demo cards read from a worn photo (of {ph['cards']})", ph["read"], "", "all")
    we = figures.get("web")
    if we:
        row("web first load (sign-in + first page), compressed", we["first_load_kb"], "KB", "<= 300")
        row("web first load as served now", we["first_load_served_kb"], "KB")
        row("web repeat load with the service worker", we["repeat_load_kb"], "KB")
    return rows


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes: under two minutes")
    ap.add_argument("--json", type=Path, help="write every figure to this file")
    ap.add_argument("--parts", default=",".join(PARTS), help=f"comma-separated, of: {', '.join(PARTS)}")
    ap.add_argument("--store-sizes", help="override the store sizes (comma-separated)")
    ap.add_argument("--district", help="override the district size: FACILITIESxPREGNANCIES, e.g. 20x1000")
    ap.add_argument("--dir", type=Path, help="where to build (default: a temporary folder)")
    ap.add_argument("--keep", action="store_true", help="keep what was built")
    ap.add_argument("--phase", help=argparse.SUPPRESS)
    ap.add_argument("--args", default="{}", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.phase:
        return _phase(args.phase, args.args)
    parts = [p.strip() for p in args.parts.split(",") if p.strip()]
    bad = [p for p in parts if p not in PARTS]
    if bad:
        ap.error(f"unknown part(s) {', '.join(bad)}; choose from {', '.join(PARTS)}")
    cfg = dict(QUICK if args.quick else FULL)
    if args.store_sizes:
        cfg["store_sizes"] = sorted(int(s.replace("_", "")) for s in args.store_sizes.split(","))
    if args.district:
        f, p = args.district.lower().split("x")
        cfg["district_facilities"], cfg["district_per_facility"] = int(f), int(p)
    root = args.dir or Path(tempfile.mkdtemp(prefix="rhledger-bench-"))
    root.mkdir(parents=True, exist_ok=True)
    started = datetime.now(timezone.utc)
    figures: dict = {"run": {"quick": args.quick, "parts": parts, "config": cfg,
                             "started": started.strftime("%Y-%m-%dT%H:%M:%SZ")},
                     "machine": machine(root)}
    t = time.perf_counter()
    try:
        figures.update(run_parts(parts, cfg, root, args.keep))
    finally:
        if not args.keep and args.dir is None:
            shutil.rmtree(root, ignore_errors=True)
    figures["run"]["seconds"] = round(time.perf_counter() - t, 1)
    m = figures["machine"]
    print(f"rhledger benchmark ({'quick' if args.quick else 'full'}) on {m['cpu']}, {m['cores']} cores, "
          f"{m['memory_gib']} GiB, {m['filesystem']}; load average at start {m['load_average_at_start']}; "
          f"{figures['run']['seconds']:.0f} s")
    print("Figures are noisy on a shared machine: compare ratios within one run.")
    print(f"{'figure':<52} {'value':>12} {'unit':<5} target")
    for line in table(figures):
        print(line)
    misses = []
    for key, (limit, words) in TARGETS.items():
        v = lookup(figures, key)
        if isinstance(v, (int, float)) and v > limit:
            misses.append(f"  {key} = {v:,.2f} > {limit:g} ({words})")
    ph = (figures.get("card") or {}).get("worn_photo")
    if ph and ph["read"] < ph["cards"]:
        misses.append(f"  card.worn_photo: {ph['cards'] - ph['read']} of {ph['cards']} demo cards do not read")
    figures["targets_missed"] = misses
    if misses:
        print("targets missed:")
        print("\n".join(misses))
    if args.json:
        args.json.write_text(json.dumps(figures, indent=2) + "\n", encoding="utf-8")
        print(f"figures written to {args.json}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
