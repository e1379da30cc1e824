"""How the store's write cost changes as it grows. Prints figures; asserts nothing.

Grows a synthetic dataset (seed_demo.synthetic) through Store.create, and at each size
measures the writes of the next few pregnancies: time per write and bytes written per write
(the whole of each partition file rewritten, plus what was appended to the index and audit
logs). Run twice: one facility with all the pregnancies, then the same total spread over
many facilities. The last lines give the ratio of the write cost at the largest size to the
smallest: the monthly partitions should keep it near 1.

    python bench/bench_store.py                      # 100, 1,000, 10,000 pregnancies (a few minutes)
    python bench/bench_store.py --sizes 100,1000     # quicker
    python bench/bench_store.py --facilities 50 --sample 40 --dir /tmp/bench --keep

See bench/README.md for how to read the output.
"""
from __future__ import annotations

import argparse
import os
import shutil
import statistics
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from clinic.store import Store  # noqa: E402
from seed_demo import synthetic  # noqa: E402

WATCHED = ("records", "audit")


def snapshot(data_dir: Path) -> dict[str, tuple[int, int, int]]:
    """path -> (inode, size, mtime_ns) of every store file."""
    out = {}
    for sub in WATCHED:
        for root, _dirs, files in os.walk(data_dir / sub):
            for name in files:
                p = os.path.join(root, name)
                try:
                    st = os.stat(p)
                except FileNotFoundError:
                    continue
                out[p] = (st.st_ino, st.st_size, st.st_mtime_ns)
    return out


def bytes_written(before: dict, after: dict) -> int:
    """Rewritten files count whole (a new inode: written to a temp file and renamed);
    appended logs count what was added."""
    total = 0
    for p, (ino, size, mtime) in after.items():
        old = before.get(p)
        if old is None:
            total += size
        elif old[0] != ino:
            total += size
        elif old[1:] != (size, mtime):
            total += max(0, size - old[1])
    return total


def partition_stats(data_dir: Path) -> tuple[int, int]:
    files = [p for p in (data_dir / "records").glob("*/*.json")]
    return len(files), max((p.stat().st_size for p in files), default=0)


class Grower:
    """Feeds the synthetic calls of one layout into a store, in order, a pregnancy at a time."""

    def __init__(self, data_dir: Path, facilities: int, per_facility: int, seed: int, now: datetime,
                 per_month: int):
        synthetic.prepare(data_dir, force=True)
        self.data_dir = data_dir
        self.store = Store(data_dir)
        self.calls = synthetic.iter_calls(facilities, per_facility, seed, now, horizon=per_facility,
                                          per_month=per_month)
        self.pregnancies = 0
        self.records = 0
        self.grow_seconds = 0.0
        self.grow_writes = 0

    def grow_to(self, n: int) -> None:
        t0 = time.perf_counter()
        while self.pregnancies < n:
            for c in next(self.calls):
                synthetic.apply(self.store, c)
                self.grow_writes += 1
            self.pregnancies += 1
        self.grow_seconds += time.perf_counter() - t0

    def measure(self, sample: int) -> dict:
        times, sizes = [], []
        for _ in range(sample):
            for c in next(self.calls):
                before = snapshot(self.data_dir)
                t0 = time.perf_counter()
                synthetic.apply(self.store, c)
                times.append(time.perf_counter() - t0)
                sizes.append(bytes_written(before, snapshot(self.data_dir)))
            self.pregnancies += 1
        t0 = time.perf_counter()
        Store(self.data_dir)
        open_s = time.perf_counter() - t0
        parts, biggest = partition_stats(self.data_dir)
        times.sort()
        return {"pregnancies": self.pregnancies, "writes": len(times),
                "ms_median": 1000 * statistics.median(times),
                "ms_p90": 1000 * times[int(0.9 * (len(times) - 1))],
                "bytes_mean": statistics.mean(sizes), "partitions": parts, "largest_partition": biggest,
                "open_s": open_s}


def run_layout(label: str, facilities: int, sizes: list[int], sample: int, seed: int, now: datetime,
               root: Path, per_month: int) -> list[dict]:
    d = root / label.replace(" ", "-")
    # Booking dates are laid out for the final size, so every size has the same months.
    per_facility_final = -(-(max(sizes) + sample * len(sizes)) // facilities)
    g = Grower(d, facilities, per_facility_final, seed, now, per_month)
    rows = []
    for size in sizes:
        g.grow_to(size)
        row = g.measure(sample)
        row["label"] = label
        rows.append(row)
        print(f"{label:<14} {row['pregnancies']:>11,} {row['ms_median']:>10.2f} {row['ms_p90']:>8.2f} "
              f"{row['bytes_mean']:>13,.0f} {row['partitions']:>10,} {row['largest_partition']:>13,} "
              f"{row['open_s']:>8.2f}", flush=True)
    writes = max(1, g.grow_writes)
    print(f"{'':<14} (growing: {g.grow_writes:,} writes in {g.grow_seconds:.1f} s, "
          f"{1000 * g.grow_seconds / writes:.2f} ms a write on average)", flush=True)
    return rows


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sizes", default="100,1000,10000", help="total pregnancies at which to measure")
    ap.add_argument("--facilities", type=int, default=50, help="facilities of the second layout (default 50)")
    ap.add_argument("--sample", type=int, default=40,
                    help="pregnancies whose writes are measured at each size (default 40: a month of one clinic)")
    ap.add_argument("--per-month", type=int, default=40, help="bookings a facility makes each month (default 40)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--dir", type=Path, default=None, help="where to build (default: a temporary folder)")
    ap.add_argument("--keep", action="store_true", help="keep the data folders afterwards")
    args = ap.parse_args(argv)
    sizes = sorted(int(s.replace("_", "").replace(",", "")) for s in args.sizes.split(","))
    now = datetime.now(timezone.utc).replace(microsecond=0)
    root = args.dir or Path(tempfile.mkdtemp(prefix="rhledger-bench-"))
    root.mkdir(parents=True, exist_ok=True)
    print(f"rhledger store benchmark: sizes {', '.join(f'{s:,}' for s in sizes)}; {args.sample} pregnancies "
          f"measured at each size; {args.per_month} bookings a facility a month; synthetic seed {args.seed}; "
          f"data under {root}")
    print(f"{'layout':<14} {'pregnancies':>11} {'ms median':>10} {'ms p90':>8} {'bytes/write':>13} "
          f"{'partitions':>10} {'largest (B)':>13} {'open (s)':>8}")
    all_rows = []
    try:
        all_rows += run_layout("1 facility", 1, sizes, args.sample, args.seed, now, root, args.per_month)
        all_rows += run_layout(f"{args.facilities} facilities", args.facilities, sizes, args.sample,
                               args.seed, now, root, args.per_month)
    finally:
        if not args.keep:
            shutil.rmtree(root, ignore_errors=True)
    print()
    for label in dict.fromkeys(r["label"] for r in all_rows):
        rows = [r for r in all_rows if r["label"] == label]
        pairs = [(rows[0], rows[-1])] + ([(rows[-2], rows[-1])] if len(rows) > 2 else [])
        for lo, hi in pairs:
            print(f"{label}: write cost at {hi['pregnancies']:,} vs {lo['pregnancies']:,} pregnancies: "
                  f"time x{hi['ms_median'] / lo['ms_median']:.2f}, bytes x{hi['bytes_mean'] / lo['bytes_mean']:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
