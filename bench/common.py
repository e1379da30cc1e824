"""Helpers shared by the parts of ``bench/run.py``: percentiles, memory, files on disk, the
machine, and running one measurement in a fresh process (so its memory figure is its own)."""
from __future__ import annotations

import json
import os
import platform
import resource
import subprocess
import sys
import time
from contextlib import contextmanager
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def percentile(values: list[float], q: float) -> float:
    """The nearest-rank percentile ``q`` (0-100) of ``values`` (not empty)."""
    if not values:
        raise ValueError("no values")
    ordered = sorted(values)
    rank = max(1, -(-len(ordered) * q // 100))  # ceil(n q / 100), at least the first
    return ordered[int(rank) - 1]


def peak_rss_mib() -> float:
    """Peak resident memory of this process so far (Linux reports KiB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def rss_mib() -> float:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2**20


def disk_bytes(*paths: Path) -> int:
    """Bytes of every file under ``paths`` (apparent sizes)."""
    total = 0
    for base in paths:
        base = Path(base)
        if base.is_file():
            total += base.stat().st_size
            continue
        for root, _dirs, files in os.walk(base):
            for name in files:
                try:
                    total += os.stat(os.path.join(root, name)).st_size
                except FileNotFoundError:
                    pass
    return total


def drop_page_cache(*paths: Path) -> int:
    """Ask the kernel to forget the cached pages of every file under ``paths``
    (posix_fadvise DONTNEED needs no root: the next read comes from the disk). Returns files."""
    n = 0
    for base in paths:
        for root, _dirs, files in os.walk(base):
            for name in files:
                p = os.path.join(root, name)
                try:
                    fd = os.open(p, os.O_RDONLY)
                except OSError:
                    continue
                try:
                    os.fsync(fd)  # dirty pages cannot be dropped
                    os.posix_fadvise(fd, 0, 0, os.POSIX_FADV_DONTNEED)
                    n += 1
                except OSError:
                    pass
                finally:
                    os.close(fd)
    return n


@contextmanager
def timer(out: dict, key: str):
    t = time.perf_counter()
    try:
        yield
    finally:
        out[key] = time.perf_counter() - t


def run_phase(part: str, phase: str, args: dict, *, timeout: float = 3600) -> dict:
    """Run ``bench.<part>.phase(phase, args)`` in a fresh interpreter; its JSON answer."""
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    cmd = [sys.executable, str(ROOT / "bench" / "run.py"), "--phase", f"{part}:{phase}", "--args", json.dumps(args)]
    res = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=timeout, check=False)
    if res.returncode != 0:
        raise RuntimeError(f"phase {part}:{phase} failed:\n{res.stderr[-4000:]}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def _cpu_model() -> str:
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def _mem_total_gib() -> float | None:
    try:
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemTotal:"):
                return round(int(line.split()[1]) / 2**20, 1)
    except OSError:
        pass
    return None


def _filesystem(path: Path) -> str:
    try:
        best = ("", "?")
        for line in Path("/proc/mounts").read_text().splitlines():
            dev, mnt, fstype = line.split()[:3]
            if str(path).startswith(mnt) and len(mnt) > len(best[0]):
                best = (mnt, f"{fstype} ({dev})")
        return best[1]
    except OSError:
        return "?"


def machine(work_dir: Path) -> dict:
    """What the figures were measured on."""
    import sqlite3

    return {
        "cpu": _cpu_model(),
        "cores": os.cpu_count(),
        "memory_gib": _mem_total_gib(),
        "load_average_at_start": [round(x, 2) for x in os.getloadavg()],
        "os": platform.platform(),
        "python": platform.python_version(),
        "sqlite": sqlite3.sqlite_version,
        "filesystem": _filesystem(Path(work_dir).resolve()),
        "work_dir": str(work_dir),
    }
