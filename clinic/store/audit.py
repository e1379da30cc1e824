"""The audit trail: one JSON line per create, amend, void and import, never rewritten.

Files: ``<data>/audit/<facility>/<YYYY-MM>.jsonl`` by the record's facility and the UTC
month of the change, so each file stays small and an append touches one file only.
"""
from __future__ import annotations

import json
import os
import re
import threading
from pathlib import Path
from typing import Iterator

from clinic.store.storage import append_line

# The first "at" of a line is the entry's own (keys are sorted: action, at, by, changes, ...).
_AT = re.compile(rb'"at":"([0-9T:Z-]{20})"')


class AuditLog:
    def __init__(self, root: Path, on_corrupt):
        self.root = Path(root)
        self._on_corrupt = on_corrupt
        self._latest: dict[Path, tuple[int, int, str]] = {}  # file -> (inode, bytes read, latest at)
        self._latest_lock = threading.Lock()

    def latest_at(self) -> str | None:
        """The latest ``at`` of any line: when the store last changed, by the clock that wrote it.

        Only the newest month's files can hold it (a line goes to the file of its own month);
        they are read incrementally, so asking on every page costs a stat or two."""
        files = self.files()
        if not files:
            return None
        top = max(p.stem for p in files)
        found = [self._latest_in(p) for p in files if p.stem == top]
        return max((f for f in found if f), default=None)

    def _latest_in(self, path: Path) -> str:
        with self._latest_lock:
            try:
                fh = open(path, "rb")
            except FileNotFoundError:
                return ""
            with fh:
                st = os.fstat(fh.fileno())
                ino, done, best = self._latest.get(path, (st.st_ino, 0, ""))
                if ino != st.st_ino or st.st_size < done:
                    done, best = 0, ""
                fh.seek(done)
                raw = fh.read()
            end = raw.rfind(b"\n") + 1  # a torn last line is read when it is complete
            for line in raw[:end].split(b"\n"):
                m = _AT.search(line)
                if m and m.group(1).decode() > best:
                    best = m.group(1).decode()
            self._latest[path] = (st.st_ino, done + end, best)
            return best

    def path_for(self, facility: str, at: str) -> Path:
        return self.root / facility / f"{at[:7]}.jsonl"

    @staticmethod
    def line(entry: dict) -> str:
        """One entry as its audit line (no newline)."""
        return json.dumps(entry, ensure_ascii=False, separators=(",", ":"), sort_keys=True)

    def append(self, entry: dict) -> None:
        append_line(self.path_for(entry["facility"], entry["at"]), self.line(entry))

    def files(self) -> list[Path]:
        if not self.root.is_dir():
            return []
        return sorted(self.root.glob("*/*.jsonl"))

    def read(self, path: Path, needle: bytes | None = None) -> Iterator[dict]:
        raw = Path(path).read_bytes()
        if needle is not None and needle not in raw:
            return
        lines = raw.split(b"\n")
        # The last piece is b"" after a complete file, or a torn line from a crash: not a record.
        for n, line in enumerate(lines[:-1], 1):
            if not line.strip() or (needle is not None and needle not in line):
                continue
            try:
                yield json.loads(line)
            except ValueError as e:
                raise self._on_corrupt(path, ValueError(f"line {n}: {e}")) from None

    def entries(self, record_id: str | None = None, since: str | None = None) -> list[dict]:
        """Lines oldest first, optionally of one record and/or at or after ``since``."""
        out = []
        # Files and lines that do not hold the id as a JSON string are skipped unparsed.
        needle = json.dumps(record_id).encode() if record_id is not None else None
        for path in self.files():
            if since and path.stem < since[:7]:
                continue
            for e in self.read(path, needle):
                if record_id is not None and e.get("id") != record_id:
                    continue
                if since is not None and e.get("at", "") < since:
                    continue
                out.append(e)
        out.sort(key=lambda e: (e.get("at", ""), e.get("seq", 0)))
        return out


def audit_entry(action: str, record: dict, *, at: str, by: str, changes: dict,
                reason: str | None = None) -> dict:
    """The audit entry of one change to ``record`` (as stored after the change)."""
    entry = {"at": at, "by": by, "action": action, "id": record["id"], "kind": record["kind"],
             "facility": record["facility"], "woman_id": record.get("woman_id"),
             "pregnancy_id": record.get("pregnancy_id"), "version": record["version"],
             "changes": changes}
    if reason is not None:
        entry["reason"] = reason
    if record.get("origin"):
        entry["origin"] = record["origin"]
    return entry
