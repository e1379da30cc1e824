"""Durable record store: atomic TinyDB partitions, one lock, index and audit logs, backups.

See ``clinic.store.store`` for the layout on disk and DEVELOPERS.md for the contract.
"""
from clinic.store.errors import BackupInvalid, Conflict, NotFound, StoreBusy, StoreCorrupt, StoreError
from clinic.store.store import CheckReport, Store, fields_of

__all__ = ["Store", "StoreError", "StoreCorrupt", "NotFound", "Conflict", "BackupInvalid", "StoreBusy",
           "CheckReport", "fields_of"]
