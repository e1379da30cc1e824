"""Schema migrations: a registry of functions taking one stored record from version n to n+1.

To change the stored shape: raise ``clinic.records.schema.SCHEMA_VERSION`` to n+1 and add

    @migration(n)
    def _rename_x(record: dict) -> dict:   # record is at version n
        ...
        return record                     # the runner sets record["schema"] = n + 1

The store runs every step at start-up (after a safety backup), one partition file at a time.
Each record carries its own ``schema``, so a migration interrupted by a crash resumes where it
stopped and never applies a step twice.
"""
from __future__ import annotations

from typing import Callable

from clinic.records import schema
from clinic.store.errors import StoreError

Migration = Callable[[dict], dict]

MIGRATIONS: dict[int, Migration] = {}


def migration(from_version: int):
    """Register ``fn`` as the step from ``from_version`` to ``from_version + 1``."""
    def deco(fn: Migration) -> Migration:
        if from_version in MIGRATIONS:
            raise ValueError(f"a migration from schema {from_version} is already registered")
        MIGRATIONS[from_version] = fn
        return fn
    return deco


def target_version() -> int:
    return schema.SCHEMA_VERSION


def check_path(current: int, target: int | None = None) -> None:
    """Refuse a store that is newer than this code, or a gap in the registry."""
    target = target_version() if target is None else target
    if current > target:
        raise StoreError(f"the store is at schema version {current} but this rhledger knows only up to "
                         f"{target}: install the newer rhledger that wrote it")
    for n in range(current, target):
        if n not in MIGRATIONS:
            raise StoreError(f"no migration registered from schema version {n} to {n + 1} "
                             f"(clinic/store/migrate.py)")


def upgrade_record(record: dict, target: int | None = None) -> tuple[dict, bool]:
    """Bring one record up to ``target``; returns (record, changed)."""
    target = target_version() if target is None else target
    v = int(record.get("schema", 1))
    check_path(v, target)
    changed = False
    while v < target:
        record = MIGRATIONS[v](dict(record))
        v += 1
        record["schema"] = v
        changed = True
    return record, changed
