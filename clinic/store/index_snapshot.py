"""A snapshot of the parsed index log, so that opening a large store reads it instead of parsing
every line of ``records/index.log`` again.

``records/.index.snapshot`` holds the parsed ``IndexLog`` state (marshal) with what identifies
the log it was made from: the log's inode, the offset read up to, the 64 bytes before that
offset and a hash of the log's first 64 KiB. It is used only when all of them still match
(same file, not cut shorter, same bytes there), and the log is then read on from that offset
as usual, so a snapshot can be old but not wrong: the store only ever appends to the log, and
a restored, rebuilt or cut log has no snapshot that matches. (Whoever rewrites the log in place
must delete the snapshot.) It is a cache:
a missing or unreadable snapshot costs one full parse; it is never in a backup (dot file).

A new snapshot is written when the log has grown by ``EVERY`` bytes since the last one.
"""
from __future__ import annotations

import hashlib
import marshal
import os
from pathlib import Path

from clinic.store.storage import atomic_write_bytes, gc_paused

SNAPSHOT_FILE = ".index.snapshot"
FORMAT = 2
EVERY = 4 << 20     # 4 MiB of log lines (about 40,000 records) between snapshots
TAIL = 64
HEAD = 64 << 10


def path_for(index) -> Path:
    return Path(index.path).with_name(SNAPSHOT_FILE)


def _tail(fh, offset: int) -> bytes:
    """What identifies the log up to ``offset``: its last bytes there and a hash of its start."""
    fh.seek(max(0, offset - TAIL))
    tail = fh.read(min(offset, TAIL))
    fh.seek(0)
    head = hashlib.blake2b(fh.read(min(offset, HEAD)), digest_size=16).digest()
    return tail + head


def load(index, fh, st: os.stat_result) -> bool:
    """Fill a fresh ``index`` from the snapshot when it matches the open log ``fh``; True if it did."""
    try:
        raw = path_for(index).read_bytes()
    except OSError:
        return False
    try:
        with gc_paused():
            snap = marshal.loads(raw)
        fmt, inode, offset, tail, state = snap
    except (ValueError, EOFError, TypeError):
        return False   # damaged or from another version: parse the log instead
    if fmt != FORMAT or inode != st.st_ino or not 0 < offset <= st.st_size or _tail(fh, offset) != tail:
        return False
    (index.locs, index.order, index.by_kind, index.children, index.pregnancies_of, index.per_partition,
     index._strings) = state
    index._inode, index._offset, index._snapshot_offset = inode, offset, offset
    return True


def save_if_due(index) -> None:
    """Write a snapshot of ``index`` when its log grew by ``EVERY`` bytes since the last one."""
    if index._offset - getattr(index, "_snapshot_offset", 0) < EVERY or index._inode is None:
        return
    try:
        with open(index.path, "rb") as fh:
            if os.fstat(fh.fileno()).st_ino != index._inode:
                return
            tail = _tail(fh, index._offset)
        state = (index.locs, index.order, index.by_kind, index.children, index.pregnancies_of, index.per_partition,
                 index._strings)
        atomic_write_bytes(path_for(index), marshal.dumps((FORMAT, index._inode, index._offset, tail, state)))
    except OSError:
        return   # a cache: the next open parses the log, and that is all
    index._snapshot_offset = index._offset
