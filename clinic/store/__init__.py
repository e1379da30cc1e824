"""Durable record store: atomic TinyDB partitions, one lock, index and audit logs, backups.

See ``clinic.store.store`` for the rooms it is made of, ``clinic.store.layout`` for the files
on disk and DEVELOPERS.md for the contract.
"""
from clinic.records.envelope import fields_of
from clinic.store.check import CheckReport
from clinic.store.errors import (
    BackupInvalid,
    BackupRefused,
    Conflict,
    NotFound,
    StoreBusy,
    StoreCorrupt,
    StoreError,
    StoreUnwritable,
)
from clinic.store.records_api import Created
from clinic.store.store import Store

__all__ = ["Store", "StoreError", "StoreCorrupt", "NotFound", "Conflict", "BackupInvalid", "BackupRefused",
           "StoreBusy", "StoreUnwritable",
           "CheckReport", "Created", "fields_of"]
