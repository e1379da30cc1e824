"""Is the laptop's clock behind the times this store has already written?

A laptop whose battery ran flat, or whose clock someone set back, stamps new records earlier
than ones it saved before. Nothing is lost or reordered by that (entries are ordered and
planned by the times they record, amendments by their version), but the new record's
``created_at`` is wrong and a date typed as "today" may be refused as in the future, so the
app says so. The newest time the store wrote is read from the tail of the newest audit files
of each facility (every create, amend, void and import appends a line stamped with this
laptop's clock), cached by file so that a page view costs a few ``stat`` calls.
"""
from __future__ import annotations

import json
import threading
from datetime import datetime, timedelta
from pathlib import Path

from clinic.records.values import parse_utc
from clinic.store.layout import AUDIT_DIR

# Clocks of a laptop and its phones differ by minutes; a day back is what this is for.
TOLERANCE = timedelta(minutes=10)
TAIL = 256 * 1024
FILES_PER_FACILITY = 2

_cache: dict[tuple, str | None] = {}
_lock = threading.Lock()


def _tail_newest(path: Path) -> str | None:
    with open(path, "rb") as fh:
        size = fh.seek(0, 2)
        fh.seek(max(0, size - TAIL))
        raw = fh.read()
    newest = None
    for line in raw.split(b"\n")[1 if size > TAIL else 0:]:
        try:
            at = json.loads(line).get("at")
        except ValueError:
            continue  # the cut first line of the tail, or a torn last one
        if isinstance(at, str) and (newest is None or at > newest):
            newest = at
    return newest


def newest_written(data_dir: Path) -> str | None:
    """The latest ``at`` (UTC text) among the store's newest audit lines; None for an empty store."""
    root = Path(data_dir) / AUDIT_DIR
    if not root.is_dir():
        return None
    files = []
    for fac in root.iterdir():
        if fac.is_dir():
            files += sorted(fac.glob("*.jsonl"))[-FILES_PER_FACILITY:]
    keys = []
    for p in files:
        try:
            st = p.stat()
        except FileNotFoundError:
            continue
        keys.append((str(p), st.st_ino, st.st_size, st.st_mtime_ns))
    key = tuple(sorted(keys))
    with _lock:
        if key in _cache:
            return _cache[key]
    stamps = [t for t in (_tail_newest(Path(k[0])) for k in key) if t]
    newest = max(stamps) if stamps else None
    with _lock:
        if len(_cache) > 64:
            _cache.clear()
        _cache[key] = newest
    return newest


def clock_warning(data_dir: Path, now: datetime) -> str | None:
    """A warning when ``now`` (aware) is more than a few minutes before the newest time written."""
    newest = newest_written(data_dir)
    if newest is None:
        return None
    latest = parse_utc(newest)
    if now >= latest - TOLERANCE:
        return None
    behind = latest - now
    hours = behind.total_seconds() / 3600
    amount = f"{hours / 24:.1f} days" if hours >= 48 else f"{hours:.1f} hours" if hours >= 2 else \
        f"{int(behind.total_seconds() // 60)} minutes"
    return (f"This laptop's clock reads {now:%d %b %Y %H:%M} UTC, {amount} earlier than the newest record it has "
            f"already saved ({latest:%d %b %Y %H:%M} UTC): the clock has gone back. Set the date and time "
            f"right before saving more; records saved meanwhile carry the wrong time of saving.")
