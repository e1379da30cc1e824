"""Where the store keeps what, under the data directory::

    store.lock                          cross-process lock (filelock)
    records/store.json                  {"schema": N}: the stored schema version
    records/index.log                   one line per record: id partition kind woman pregnancy
    records/.journal                    the write in progress (see ``journal``)
    records/.verified.json              partition files that parsed when last opened (a cache)
    records/<facility>/<YYYY-MM>.json   a pregnancy (by booking month) with all its entries,
                                        and women (by the month they were registered)
    records/<facility>/stock-<YYYY>.json  anti-D stock movements
    audit/<facility>/<YYYY-MM>.jsonl    one JSON line per create, amend, void and import
    backups/rhledger-*.tar.gz           see clinic.store.backup

and which partition a new record goes to (``partition_for``).
"""
from __future__ import annotations

from datetime import tzinfo
from pathlib import Path

from clinic.records.values import parse_utc
from clinic.store.index import Loc

RECORDS_DIR = "records"
AUDIT_DIR = "audit"
META_FILE = "store.json"
INDEX_FILE = "index.log"
LOCK_FILE = "store.lock"
VERIFIED_FILE = ".verified.json"


def partition_files(records_dir: Path) -> list[Path]:
    """Every partition file, sorted (dot files are the store's own bookkeeping)."""
    if not records_dir.is_dir():
        return []
    return sorted(p for p in records_dir.glob("*/*.json") if not p.name.startswith("."))


def partition_for(record: dict, tz: tzinfo, parent: Loc | None) -> str:
    """The partition a new record goes to; ``parent``: where its pregnancy is, when known."""
    kind, fac = record["kind"], record["facility"]
    if kind == "stock":
        return f"{fac}/stock-{parse_utc(record['at']).astimezone(tz).year:04d}"
    if kind == "pregnancy":
        return f"{fac}/{record['booked_on'][:7]}"
    if record.get("pregnancy_id") and parent is not None:
        return parent.partition  # one pregnancy and all its entries in one file
    return f"{fac}/{parse_utc(record['created_at']).astimezone(tz).strftime('%Y-%m')}"
