"""A store file that does not parse is refused with a message saying how to restore, and left untouched."""
from __future__ import annotations

import pytest

from clinic.store import Store, StoreCorrupt
from tests.conftest import FACILITY_ID


def test_corrupt_partition_is_refused_and_left_byte_for_byte(data_dir, store, pregnancy):
    newest = store.backup()
    (part,) = (data_dir / "records" / FACILITY_ID).glob("*.json")
    damaged = part.read_bytes()[:-40] + b"\x00garbage"
    part.write_bytes(damaged)
    stat_before = part.stat()
    with pytest.raises(StoreCorrupt) as e:
        Store(data_dir)
    msg = str(e.value)
    assert str(part) in msg
    assert str(newest) in msg
    assert f"rhledger restore {newest} --data {data_dir}" in msg
    assert part.read_bytes() == damaged
    assert part.stat().st_mtime_ns == stat_before.st_mtime_ns


def test_running_store_refuses_to_write_over_a_file_damaged_under_it(data_dir, store, woman, pregnancy, now):
    (part,) = (data_dir / "records" / FACILITY_ID).glob("*.json")
    part.write_bytes(b"{not json")
    with pytest.raises(StoreCorrupt):
        store.amend(woman["id"], {"village": "X"}, by="u", reason="r", now=now)
    assert part.read_bytes() == b"{not json"


def test_message_without_any_backup_still_gives_the_command(data_dir, store, pregnancy):
    (part,) = (data_dir / "records" / FACILITY_ID).glob("*.json")
    part.write_bytes(b"[1, 2")
    with pytest.raises(StoreCorrupt, match=r"(?s)no backup in .*rhledger restore FILE --data"):
        Store(data_dir)


def test_corrupt_schema_file_is_refused(data_dir, store):
    meta = data_dir / "records" / "store.json"
    meta.write_bytes(b"{")
    with pytest.raises(StoreCorrupt, match="store.json"):
        Store(data_dir)
    assert meta.read_bytes() == b"{"


def test_garbled_index_line_is_refused(data_dir, store, pregnancy):
    index = data_dir / "records" / "index.log"
    index.write_bytes(index.read_bytes() + b"only-two fields\n")
    with pytest.raises(StoreCorrupt, match="index.log"):
        Store(data_dir)
