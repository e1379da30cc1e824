"""Turning the operating system's "cannot write" into a message for the person at the laptop.

A full disk, a file-size limit, a data folder mounted read-only or without write permission:
every write of the store happens under its lock (``writer.Writer._locked``), which hands
such an ``OSError`` on as ``StoreUnwritable``. What the write had done so far is undone or
settled by the journal at the next write, as after a crash, so the store stays whole.
"""
from __future__ import annotations

import errno
from contextlib import contextmanager
from pathlib import Path

from clinic.store.errors import StoreUnwritable

_FULL = {errno.ENOSPC, errno.EDQUOT, errno.EFBIG}
_READ_ONLY = {errno.EROFS, errno.EACCES, errno.EPERM}
_IO = {errno.EIO}

ADVICE = {
    "disk-full": "Free some space on the disk that holds the data folder (delete old downloads, or move "
                 "old backups from {data}/backups to another disk), then save again.",
    "read-only": "The data folder {data} cannot be written: check the disk is not write-protected or "
                 "mounted read-only and that rhledger runs as the user who owns the folder, then save again.",
    "io-error": "The disk reported an error: copy the newest backup from {data}/backups to another disk "
                "now, then check the disk.",
}
WHAT = {"disk-full": "the disk is full", "read-only": "the data folder is read-only", "io-error": "a disk error"}


def reason_of(e: OSError) -> str | None:
    if e.errno in _FULL:
        return "disk-full"
    if e.errno in _READ_ONLY:
        return "read-only"
    if e.errno in _IO:
        return "io-error"
    return None


def unwritable(e: OSError, data_dir: Path) -> StoreUnwritable | None:
    """The StoreUnwritable for ``e``, or None when ``e`` is not a failure to write."""
    reason = reason_of(e)
    if reason is None:
        return None
    path = e.filename if isinstance(e.filename, str) else None
    where = f" ({path})" if path else ""
    return StoreUnwritable(f"Nothing was saved: {WHAT[reason]}{where}: {e.strerror}. "
                           + ADVICE[reason].format(data=data_dir), reason, path)


@contextmanager
def translated(data_dir: Path):
    """Run a block of store work; a failure to write becomes StoreUnwritable."""
    try:
        yield
    except OSError as e:
        err = unwritable(e, data_dir)
        if err is None:
            raise
        raise err from e
