"""What can go wrong in the store, each named for what happened."""
from __future__ import annotations


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


class StoreUnwritable(StoreError):
    """The data folder could not be written (the disk is full, or the folder is read-only):
    nothing of the write was acknowledged, and the store is as it was before it.

    ``reason`` is "disk-full", "read-only" or "io-error"; ``path`` the file that failed."""

    def __init__(self, message: str, reason: str, path: str | None = None):
        super().__init__(message)
        self.reason = reason
        self.path = path
