"""The id -> partition index: an append-only log, one line per new record.

Line: ``<id> <partition> <kind> <woman_id|-> <pregnancy_id|->``. Appending a line is cheap
and durable (fsync); every process reads the log incrementally from the offset it last
reached, so records another process created are found. A torn last line (a crash mid-append)
has no newline and is ignored until the next append trims it.
"""
from __future__ import annotations

import os
from pathlib import Path
from typing import NamedTuple

from clinic.store import index_snapshot
from clinic.store.storage import append_line, append_lines, gc_paused


class Loc(NamedTuple):
    partition: str
    kind: str
    woman_id: str | None
    pregnancy_id: str | None


BLOCK = 1 << 22  # read the log 4 MiB at a time: a district index is ~150 MiB


class IndexLog:
    """The parsed log. ``locs`` maps id -> (partition, kind, woman_id, pregnancy_id) as a plain
    tuple (``get`` gives a ``Loc``); repeated strings (partitions, kinds, parent ids) are shared,
    so a district index of a million lines stays a few hundred bytes a record."""

    def __init__(self, path: Path, on_corrupt):
        self.path = Path(path)
        self._on_corrupt = on_corrupt
        self._reset()

    def _reset(self) -> None:
        self._inode: int | None = None
        self._offset = 0
        self.locs: dict[str, tuple[str, str, str | None, str | None]] = {}
        self.order: list[str] = []
        self.by_kind: dict[str, list[str]] = {}  # kind -> ids, creation order
        self.children: dict[str, list[str]] = {}  # pregnancy id -> entry ids
        self.pregnancies_of: dict[str, list[str]] = {}  # woman id -> pregnancy ids
        self.per_partition: dict[str, int] = {}  # partition -> ids the log places there
        self._strings: dict[str, str] = {}  # one copy of each partition, kind and parent id
        self._snapshot_offset = 0  # where the newest snapshot (index_snapshot) ends

    def refresh(self) -> bool:
        """Read what other processes appended since the last call. True when the log was read
        again from the start because it was replaced, cut or removed (a restore, a repair, or
        damage: the caller checks it against the partitions)."""
        try:
            fh = open(self.path, "rb")
        except FileNotFoundError:
            if self._inode is not None:
                self._reset()
                return True
            return False
        restarted = False
        with fh:
            st = os.fstat(fh.fileno())
            if st.st_ino != self._inode or st.st_size < self._offset:
                restarted = self._inode is not None
                self._reset()  # replaced (restore) or cut: read it again from the start
                self._inode = st.st_ino
                index_snapshot.load(self, fh, st)  # or from a snapshot of it that still matches
            if st.st_size == self._offset:
                return restarted
            fh.seek(self._offset)
            left = st.st_size - self._offset
            carry = b""
            with gc_paused():
                while left > 0:
                    block = fh.read(min(BLOCK, left))
                    if not block:
                        break
                    left -= len(block)
                    block = carry + block if carry else block
                    end = block.rfind(b"\n")
                    if end < 0:
                        carry = block
                        continue
                    self._add_lines(block[:end].decode("utf-8", errors="replace").split("\n"), self._offset)
                    self._offset += end + 1
                    carry = block[end + 1:]
        # A torn last line (no newline yet) stays unread until it is completed or trimmed.
        index_snapshot.save_if_due(self)
        return restarted

    def _add_lines(self, lines: list[str], offset: int) -> None:
        locs, order, strings = self.locs, self.order, self._strings
        children, pregnancies_of, by_kind = self.children, self.pregnancies_of, self.by_kind
        per_partition = self.per_partition
        share = strings.setdefault
        for n, line in enumerate(lines):
            parts = line.split(" ")
            if len(parts) != 5 or not all(parts):
                at = offset + sum(len(x.encode("utf-8")) + 1 for x in lines[:n])
                raise self._on_corrupt(self.path, ValueError(f"bad index line at byte {at}: {line[:120]!r}"))
            rid, partition, kind, wid, pid = parts
            if rid in locs:
                continue  # a create retried after a crash between the index line and the partition write
            partition = share(partition, partition)
            kind = share(kind, kind)
            wid = None if wid == "-" else share(wid, wid)
            pid = None if pid == "-" else share(pid, pid)
            if kind == "pregnancy" or kind == "woman":
                rid = share(rid, rid)  # the parent id of later lines: one string object for all
            locs[rid] = (partition, kind, wid, pid)
            per_partition[partition] = per_partition.get(partition, 0) + 1
            order.append(rid)
            ids = by_kind.get(kind)
            if ids is None:
                ids = by_kind[kind] = []
            ids.append(rid)
            if pid is not None and kind != "pregnancy":
                got = children.get(pid)
                if got is None:
                    children[pid] = [rid]
                else:
                    got.append(rid)
            if kind == "pregnancy" and wid is not None:
                pregnancies_of.setdefault(wid, []).append(rid)

    def get(self, rid: str) -> Loc | None:
        t = self.locs.get(rid)
        return Loc(*t) if t is not None else None

    @staticmethod
    def line(rid: str, loc: Loc) -> str:
        return " ".join((rid, loc.partition, loc.kind, loc.woman_id or "-", loc.pregnancy_id or "-"))

    def append(self, rid: str, loc: Loc) -> None:
        """Durably add one record's location (store lock held)."""
        append_line(self.path, self.line(rid, loc))
        self.refresh()

    def append_many(self, items: list[tuple[str, Loc]]) -> None:
        """Durably add many locations with one write and one fsync (store lock held)."""
        append_lines(self.path, [self.line(rid, loc) for rid, loc in items])
        self.refresh()
