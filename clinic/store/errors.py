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


class BackupRefused(StoreError):
    """A backup that is intact but may not be restored here as asked (another facility's, or
    one whose origin cannot be proven); the message says why and the option that allows it."""
