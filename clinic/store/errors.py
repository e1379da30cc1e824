"""What can go wrong in the store, each named for what happened."""
from __future__ import annotations

import errno
from pathlib import Path


class StoreError(Exception):
    """Base class of every store failure."""


class StoreCorrupt(StoreError):
    """A store file does not parse; it is left untouched and the message says how to restore it."""


class NotFound(StoreError, LookupError):
    """No record with that id (or a parent the record needs does not exist)."""


class Conflict(StoreError):
    """The record changed since it was read, or the same id arrived with different content."""

    def __init__(self, message: str, current_version: int | None = None):
        super().__init__(message)
        self.current_version = current_version


class BackupInvalid(StoreError):
    """A backup archive whose checksum or manifest does not match: refused, nothing replaced."""


class StoreBusy(StoreError):
    """Another process held the store lock for longer than the timeout."""


class BackupRefused(StoreError):
    """A backup that is intact but may not be restored here as asked (another facility's, or
    one whose origin cannot be proven); the message says why and the option that allows it."""


class StoreUnwritable(StoreError):
    """The data folder cannot be written: the disk is full, or the folder is read-only or not
    the user's. Nothing was half-written; the message names the cause and what to do."""


_FULL = {errno.ENOSPC, errno.EDQUOT, errno.EFBIG}
_READ_ONLY = {errno.EROFS, errno.EACCES, errno.EPERM}


def unwritable(e: OSError, data_dir: Path) -> StoreUnwritable | None:
    """The plain-words error for an OSError that means the data folder cannot be written
    (None for any other OSError, which is a different problem)."""
    where = getattr(e, "filename", None) or data_dir
    if e.errno in _FULL:
        return StoreUnwritable(
            f"The disk holding {data_dir} is full ({e.strerror or 'no space left'}, writing {where}). Nothing was "
            f"saved. Free some space on it (old files in {Path(data_dir) / 'backups'} can be moved to another "
            f"disk), then try again.")
    if e.errno in _READ_ONLY:
        return StoreUnwritable(
            f"The data folder {data_dir} cannot be written ({e.strerror or 'read-only'}, writing {where}): it is "
            f"on a read-only disk, or it belongs to another user. Nothing was saved. Run rhledger as the user "
            f"who owns the folder, or make it writable, then try again.")
    return None
