"""Atomic, fsync'd files and the TinyDB storage that uses them.

TinyDB's own JSONStorage rewrites a file in place, so a crash mid-write can leave it
unreadable. Here every write serialises first, writes a temp file beside the target,
flushes and fsyncs it, renames it over the old file and fsyncs the directory: after a
crash the file holds either the old or the new content, never a mix.
"""
from __future__ import annotations

import gc
import json
import os
import threading
from collections import OrderedDict
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from tinydb.storages import Storage

from clinic.store.errors import StoreCorrupt

TABLE = "records"


_gc_lock = threading.Lock()
_gc_depth = 0
_gc_was_enabled = False


@contextmanager
def gc_paused():
    """No cyclic garbage collection while bulk data is parsed (nestable, thread-safe).

    Parsing a district index or a partition allocates millions of containers; each
    allocation burst would set off full collections that walk everything already loaded.
    The data parsed holds no reference cycles, so nothing is lost by pausing.
    """
    global _gc_depth, _gc_was_enabled
    with _gc_lock:
        if _gc_depth == 0:
            _gc_was_enabled = gc.isenabled()
            gc.disable()
        _gc_depth += 1
    try:
        yield
    finally:
        with _gc_lock:
            _gc_depth -= 1
            if _gc_depth == 0 and _gc_was_enabled:
                gc.enable()


def fsync_dir(path: Path) -> None:
    """Make a rename or a new file in ``path`` durable (POSIX; Windows cannot open a folder)."""
    if not hasattr(os, "O_DIRECTORY"):
        return
    fd = os.open(path, os.O_RDONLY | os.O_DIRECTORY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def ensure_dir(path: Path) -> None:
    """mkdir -p, fsyncing each parent whose entry list changed."""
    path = Path(path)
    if path.is_dir():
        return
    ensure_dir(path.parent)
    try:
        path.mkdir()
    except FileExistsError:
        return
    fsync_dir(path.parent)


def atomic_write_bytes(path: Path, payload: bytes) -> None:
    """Replace ``path`` with ``payload``; durable when this returns."""
    path = Path(path)
    ensure_dir(path.parent)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.{threading.get_ident()}.tmp")
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    try:
        view = memoryview(payload)
        while view:
            n = os.write(fd, view)
            view = view[n:]
        os.fsync(fd)
    except BaseException:
        os.close(fd)
        tmp.unlink(missing_ok=True)
        raise
    os.close(fd)
    try:
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    fsync_dir(path.parent)


def append_line(path: Path, line: str) -> None:
    """Append one line to a log file, trimming a torn tail left by a crash; durable on return.

    Call with the store lock held (the trim must not race another writer).
    """
    append_lines(path, [line])


def append_lines(path: Path, lines: list[str]) -> None:
    """Append many lines to a log file with one write and one fsync (torn tail trimmed first).

    Call with the store lock held. Durable on return.
    """
    if not lines:
        return
    path = Path(path)
    ensure_dir(path.parent)
    data = "".join(line.rstrip("\n") + "\n" for line in lines).encode("utf-8")
    new = not path.exists()
    # 0600 like the partitions: the audit log and the index hold names and clinical changes.
    with open(path, "a+b", opener=_private_opener) as fh:
        _trim_torn_tail(fh, path)
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())
    if new:
        fsync_dir(path.parent)


def _private_opener(path: str, flags: int) -> int:
    """os.open making a new file readable by the owner only (an existing file keeps its mode)."""
    return os.open(path, flags, 0o600)


def _trim_torn_tail(fh, path: Path) -> None:
    size = fh.seek(0, os.SEEK_END)
    if size:
        fh.seek(size - 1)
        if fh.read(1) != b"\n":
            # A crash cut the previous append short: that line was never acknowledged.
            start = max(0, size - (1 << 20))
            fh.seek(start)
            cut = fh.read().rfind(b"\n")
            if cut < 0 and start > 0:
                raise StoreCorrupt(f"{path} ends with more than 1 MiB without a line break; "
                                   f"not a log this store wrote. Left untouched.")
            fh.truncate(start + cut + 1)


def complete_size(path: Path) -> int:
    """Bytes of ``path`` up to and including its last line break (0 when absent or torn)."""
    try:
        with open(path, "rb") as fh:
            size = fh.seek(0, os.SEEK_END)
            if not size:
                return 0
            fh.seek(size - 1)
            return size if fh.read(1) == b"\n" else 0  # torn: a reader starts from the top
    except FileNotFoundError:
        return 0


def file_key(st: os.stat_result) -> tuple[int, int, int]:
    """What identifies one version of a file: os.replace always makes a new inode."""
    return (st.st_ino, st.st_mtime_ns, st.st_size)


class PartitionCache:
    """Parsed partition files keyed by (inode, mtime_ns, size); a read cache only.

    Writes always go straight to disk; a file another process replaced has a new key and is
    parsed again. Bounded (least recently used first out) so a large district store does not
    hold every partition in memory.
    """

    def __init__(self, capacity: int = 128, on_corrupt=None):
        self.capacity = capacity
        self._items: OrderedDict[Path, tuple[tuple, dict, dict | None]] = OrderedDict()
        self._lock = threading.RLock()
        self._on_corrupt = on_corrupt  # builds the StoreCorrupt message (names backup + command)

    def scan(self, path: Path) -> tuple[dict | None, bool]:
        """(content, fresh) for a one-pass read of many partitions: a cached copy when current
        (fresh False: shared, copy before handing out), else parsed and NOT cached (fresh True:
        nobody else holds it), so a full scan neither evicts the working set nor copies."""
        _, data, fresh = self.scan_keyed(path)
        return data, fresh

    def scan_keyed(self, path: Path) -> tuple[tuple[int, int, int] | None, dict | None, bool]:
        """``scan`` and the key of the very file version it read: (key, content, fresh)."""
        path = Path(path)
        try:
            fh = open(path, "rb")
        except FileNotFoundError:
            return None, None, True
        with fh:
            key = file_key(os.fstat(fh.fileno()))
            with self._lock:
                hit = self._items.get(path)
                if hit is not None and hit[0] == key:
                    return key, hit[1], False
            raw = fh.read()
        return key, self._parse(path, raw), True

    def load(self, path: Path) -> dict | None:
        """The parsed content of ``path`` (None when it does not exist)."""
        path = Path(path)
        try:
            fh = open(path, "rb")
        except FileNotFoundError:
            with self._lock:
                self._items.pop(path, None)
            return None
        with fh:
            key = file_key(os.fstat(fh.fileno()))
            with self._lock:
                hit = self._items.get(path)
                if hit is not None and hit[0] == key:
                    self._items.move_to_end(path)
                    return hit[1]
            raw = fh.read()
        data = self._parse(path, raw)
        with self._lock:
            self._items[path] = (key, data, None)
            self._items.move_to_end(path)
            while len(self._items) > self.capacity:
                self._items.popitem(last=False)
        return data

    def _parse(self, path: Path, raw: bytes) -> dict:
        try:
            with gc_paused():
                data = json.loads(raw.decode("utf-8"))
            if not isinstance(data, dict) or not isinstance(data.get(TABLE, {}), dict):
                raise ValueError(f"top level is not a TinyDB document with a {TABLE!r} table")
        except (UnicodeDecodeError, ValueError) as e:
            if self._on_corrupt is not None:
                raise self._on_corrupt(path, e) from None
            raise StoreCorrupt(f"{path} does not parse: {e}") from None
        return data

    def by_id(self, path: Path) -> dict[str, tuple[str, dict]]:
        """record id -> (TinyDB doc id, record) for one partition."""
        data = self.load(path)
        if data is None:
            return {}
        with self._lock:
            hit = self._items.get(Path(path))
            if hit is not None and hit[1] is data and hit[2] is not None:
                return hit[2]
        index = {doc["id"]: (doc_id, doc) for doc_id, doc in data.get(TABLE, {}).items()
                 if isinstance(doc, dict) and "id" in doc}
        with self._lock:
            hit = self._items.get(Path(path))
            if hit is not None and hit[1] is data:
                self._items[Path(path)] = (hit[0], data, index)
        return index

    def stored(self, path: Path, data: dict) -> None:
        """Remember what was just written (the new file's key)."""
        path = Path(path)
        with self._lock:
            try:
                key = file_key(os.stat(path))
            except FileNotFoundError:
                self._items.pop(path, None)
                return
            self._items[path] = (key, data, None)
            self._items.move_to_end(path)

    def drop(self, path: Path) -> None:
        with self._lock:
            self._items.pop(Path(path), None)

    def clear(self) -> None:
        with self._lock:
            self._items.clear()


class AtomicJSONStorage(Storage):
    """A TinyDB storage for one partition file: atomic, fsync'd writes; no write cache.

    Reads come through the shared ``PartitionCache`` (re-parsed whenever the file changed).
    """

    def __init__(self, path: str | os.PathLike, cache: PartitionCache | None = None):
        self.path = Path(path)
        self.cache = cache if cache is not None else PartitionCache()

    def read(self) -> dict[str, dict[str, Any]] | None:
        return self.cache.load(self.path)

    def write(self, data: dict[str, dict[str, Any]]) -> None:
        try:
            # Serialise before touching the disk: a value JSON cannot hold fails here.
            payload = json.dumps(data, ensure_ascii=False, separators=(",", ":")).encode("utf-8")
            atomic_write_bytes(self.path, payload)
        except BaseException:
            # TinyDB changed the cached object in place before calling write.
            self.cache.drop(self.path)
            raise
        self.cache.stored(self.path, data)

    def close(self) -> None:
        pass
