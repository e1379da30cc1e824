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

from clinic.store.storage import append_line


class Loc(NamedTuple):
    partition: str
    kind: str
    woman_id: str | None
    pregnancy_id: str | None


class IndexLog:
    def __init__(self, path: Path, on_corrupt):
        self.path = Path(path)
        self._on_corrupt = on_corrupt
        self._reset()

    def _reset(self) -> None:
        self._inode: int | None = None
        self._offset = 0
        self.locs: dict[str, Loc] = {}
        self.order: list[str] = []
        self.children: dict[str, list[str]] = {}  # pregnancy id -> entry ids
        self.pregnancies_of: dict[str, list[str]] = {}  # woman id -> pregnancy ids

    def refresh(self) -> None:
        """Read what other processes appended since the last call."""
        try:
            fh = open(self.path, "rb")
        except FileNotFoundError:
            if self._inode is not None:
                self._reset()
            return
        with fh:
            st = os.fstat(fh.fileno())
            if st.st_ino != self._inode or st.st_size < self._offset:
                self._reset()  # replaced (restore) or cut: read it again from the start
                self._inode = st.st_ino
            if st.st_size == self._offset:
                return
            fh.seek(self._offset)
            chunk = fh.read(st.st_size - self._offset)
        end = chunk.rfind(b"\n")
        if end < 0:
            return
        lineno = self._offset
        for raw in chunk[: end + 1].splitlines():
            self._add(raw, lineno)
            lineno += len(raw) + 1
        self._offset += end + 1

    def _add(self, raw: bytes, offset: int) -> None:
        parts = raw.decode("utf-8", errors="replace").split(" ")
        if len(parts) != 5 or not all(parts):
            raise self._on_corrupt(self.path, ValueError(f"bad index line at byte {offset}: {raw[:120]!r}"))
        rid, partition, kind, wid, pid = parts
        loc = Loc(partition, kind, None if wid == "-" else wid, None if pid == "-" else pid)
        if rid in self.locs:
            return  # a create retried after a crash between the index line and the partition write
        self.locs[rid] = loc
        self.order.append(rid)
        if loc.pregnancy_id and kind != "pregnancy":
            self.children.setdefault(loc.pregnancy_id, []).append(rid)
        if kind == "pregnancy" and loc.woman_id:
            self.pregnancies_of.setdefault(loc.woman_id, []).append(rid)

    def get(self, rid: str) -> Loc | None:
        return self.locs.get(rid)

    def append(self, rid: str, loc: Loc) -> None:
        """Durably add one record's location (store lock held)."""
        line = " ".join((rid, loc.partition, loc.kind, loc.woman_id or "-", loc.pregnancy_id or "-"))
        append_line(self.path, line)
        self.refresh()
