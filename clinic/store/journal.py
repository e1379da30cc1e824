"""The write journal: every stored change gets its audit line, even across a crash.

A write changes up to three files: the index log (new records), one or more partition files
and the audit log. A crash between the partition write and the audit append would leave a
stored change nobody can account for. So every write (store lock held) goes:

1. ``records/.journal``: for each partition about to be rewritten, its file key now
   (inode, mtime_ns, size) and the audit lines of its changes; appended and fsync'd;
2. index lines of new records (fsync'd);
3. the partition files (each replaced atomically);
4. the audit lines, one write and one fsync per audit file;
5. the journal emptied (truncated).

A journal that is not empty when the lock is next taken (by any process: every lock
acquisition and every open looks) belongs to a write that stopped before step 5. Recovery:
a partition whose file key changed was written (a replace always makes a new inode), so the
audit lines of its chunk are appended where they are still missing; a partition with the
same key was not written, so its lines are dropped (that change never happened and has no
audit line). Then the journal is emptied. Recovery only appends, and appending a line that
is already there is skipped, so a crash during recovery is recovered the same way.

Lines (fields separated by one space; partition and audit paths contain no space):

    S <audit file> <size>            audit file and its complete size when the write began
    P <partition> <ino:mtime:size|->  a chunk begins: the partition's key before (- absent)
    A <partition> <audit file> <json> an audit line of that chunk
    E <partition>                    the chunk is complete (a chunk without E was torn: its
                                     partition cannot have been written, it comes after)

The file is hidden (``.journal``): backups leave it out, and they are made with the lock held,
after recovery. A restore replaces ``records/`` whole, journal included.
"""
from __future__ import annotations

import os
from collections import Counter
from pathlib import Path
from typing import Callable, Iterable

from clinic.store.storage import append_lines, complete_size, file_key, fsync_dir

JOURNAL_FILE = ".journal"


def _key_text(path: Path) -> str:
    try:
        return ":".join(str(n) for n in file_key(os.stat(path)))
    except FileNotFoundError:
        return "-"


class Journal:
    def __init__(self, path: Path, records_dir: Path, audit_root: Path,
                 partition_path: Callable[[str], Path]):
        self.path = Path(path)
        self.records_dir = Path(records_dir)
        self.audit_root = Path(audit_root)
        self._ppath = partition_path
        self._rels: dict[Path, str] = {}

    def pending(self) -> bool:
        """True when a write has begun and not finished (or stopped; then recover)."""
        try:
            return os.stat(self.path).st_size > 0
        except FileNotFoundError:
            return False

    def _rel(self, audit_path: Path) -> str:
        rel = self._rels.get(audit_path)
        if rel is None:
            rel = self._rels[audit_path] = Path(audit_path).relative_to(self.audit_root).as_posix()
        return rel

    def _write(self, text: str, *, truncate: bool, sync: bool) -> None:
        new = not self.path.exists()
        flags = os.O_WRONLY | os.O_CREAT | (os.O_TRUNC if truncate else os.O_APPEND)
        fd = os.open(self.path, flags, 0o600)
        try:
            data = memoryview(text.encode("utf-8"))
            while data:
                n = os.write(fd, data)
                data = data[n:]
            if sync:
                os.fsync(fd)
        finally:
            os.close(fd)
        if new:
            fsync_dir(self.path.parent)

    def begin(self, audit_paths: Iterable[Path]) -> None:
        """Start a write: note the audit files it may append to (synced with the first chunk)."""
        lines = [f"S {self._rel(p)} {complete_size(p)}\n" for p in sorted(set(map(Path, audit_paths)))]
        self._write("".join(lines), truncate=True, sync=False)

    def chunk(self, partition: str, audit_lines: list[tuple[Path, str]]) -> None:
        """Record one partition's key and its audit lines, durably, before it is rewritten."""
        parts = [f"P {partition} {_key_text(self._ppath(partition))}\n"]
        parts += [f"A {partition} {self._rel(p)} {line}\n" for p, line in audit_lines]
        parts.append(f"E {partition}\n")
        self._write("".join(parts), truncate=False, sync=True)

    def finish(self) -> None:
        """The write is complete: empty the journal (no fsync needed: see recover)."""
        # Should this truncation be lost in a power cut, recovery finds every partition of the
        # journal written and every audit line present, and appends nothing.
        os.truncate(self.path, 0)

    def recover(self) -> list[str]:
        """Complete or drop what an interrupted write left (store lock held). Notes for check."""
        try:
            raw = self.path.read_bytes()
        except FileNotFoundError:
            return []
        if not raw:
            return []
        start: dict[str, int] = {}
        chunks: list[tuple[str, str, list[tuple[str, str]]]] = []
        open_chunk: tuple[str, str, list[tuple[str, str]]] | None = None
        for line in raw.split(b"\n")[:-1]:  # the piece after the last newline is torn
            text = line.decode("utf-8", errors="replace")
            tag, _, rest = text.partition(" ")
            if tag == "S":
                rel, _, size = rest.rpartition(" ")
                start[rel] = int(size) if size.isdigit() else 0
            elif tag == "P":
                part, _, key = rest.partition(" ")
                open_chunk = (part, key, [])
            elif tag == "A" and open_chunk is not None:
                part, _, rest2 = rest.partition(" ")
                rel, _, audit_line = rest2.partition(" ")
                open_chunk[2].append((rel, audit_line))
            elif tag == "E" and open_chunk is not None and open_chunk[0] == rest:
                chunks.append(open_chunk)
                open_chunk = None
        todo: dict[str, list[str]] = {}
        written = dropped = 0
        for part, key_before, lines in chunks:
            if _key_text(self._ppath(part)) == key_before:
                dropped += len(lines)  # never written: the change did not happen
                continue
            written += len(lines)
            for rel, audit_line in lines:
                todo.setdefault(rel, []).append(audit_line)
        appended = 0
        for rel, lines in todo.items():
            path = self.audit_root / rel
            have: Counter[str] = Counter()
            try:
                with open(path, "rb") as fh:
                    fh.seek(start.get(rel, 0))
                    tail = fh.read()
                for got in tail.split(b"\n")[:-1]:
                    have[got.decode("utf-8", errors="replace")] += 1
            except FileNotFoundError:
                pass
            missing = []
            for audit_line in lines:
                if have[audit_line] > 0:
                    have[audit_line] -= 1
                else:
                    missing.append(audit_line)
            append_lines(path, missing)
            appended += len(missing)
        fd = os.open(self.path, os.O_WRONLY | os.O_TRUNC)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)
        return [f"an interrupted write was recovered: {written} change(s) had been stored "
                f"({appended} audit line(s) added), {dropped} had not (dropped)"]
