"""The index is not a single point of silent loss. records/index.log only says where each record
is; the partition files are the truth. Deleted, cut short (at a line or mid-line) or reordered,
the index never makes the store open with a short list: every record is still found (the store
rebuilds the index from the partitions) or the store refuses to open naming the repair command.
`rhledger check --repair` rebuilds it too."""
from __future__ import annotations

import json
import random

import pytest
from click.testing import CliRunner

from clinic.cli.main import cli
from clinic.store import Store, StoreCorrupt
from tests.conftest import FACILITY_ID, USERNAME


@pytest.fixture
def filled(store, now):
    """Women and pregnancies (with entries) in several partitions."""
    ids = []
    for i in range(6):
        w = store.create("woman", {"name": f"Index Test {i}", "stated_age": 20 + i}, by=USERNAME,
                         facility=FACILITY_ID, now=now).record
        p = store.create("pregnancy", {"booked_on": f"2026-0{1 + i % 3}-02", "lmp": "2025-11-20", "status": "ongoing"},
                         by=USERNAME, facility=FACILITY_ID, woman_id=w["id"], now=now).record
        t = store.create("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02"}, by=USERNAME,
                         facility=FACILITY_ID, pregnancy_id=p["id"], now=now).record
        ids += [w["id"], p["id"], t["id"]]
    return ids


def _index(data_dir):
    return data_dir / "records" / "index.log"


def _all_found(data_dir, ids):
    s = Store(data_dir)
    assert {r["id"] for r in s.iter_records()} == set(ids)
    assert all(s.get(i) is not None for i in ids)
    assert len(s.pregnancies()) == 6 and len(s.women_of()) == 6
    for p in s.pregnancies():
        assert len(s.entries(p["id"])) == 1
    return s


def _list_json(data_dir):
    res = CliRunner().invoke(cli, ["list", "--json", "--data", str(data_dir)])
    return res.exit_code, res.output


def test_a_deleted_index_is_rebuilt_from_the_partitions(data_dir, filled):
    _index(data_dir).unlink()
    s = _all_found(data_dir, filled)
    assert any("rebuilt" in n for n in s.recovered)
    assert s.check().ok


@pytest.mark.parametrize("cut", ["line", "mid-line", "empty"])
def test_a_truncated_index_is_rebuilt(data_dir, filled, cut):
    raw = _index(data_dir).read_bytes()
    lines = raw.split(b"\n")
    kept = {"line": b"\n".join(lines[:7]) + b"\n", "mid-line": raw[: len(raw) // 2], "empty": b""}[cut]
    _index(data_dir).write_bytes(kept)
    _all_found(data_dir, filled)
    assert Store(data_dir).check().ok


def test_a_reordered_index_still_finds_everything(data_dir, filled):
    lines = _index(data_dir).read_text().splitlines()
    random.Random(16).shuffle(lines)
    _index(data_dir).write_text("\n".join(lines) + "\n")
    _all_found(data_dir, filled)
    assert Store(data_dir).check().ok


def test_list_never_exits_0_with_a_short_list(data_dir, filled):
    code, before = _list_json(data_dir)
    assert code == 0 and len(json.loads(before)) == 6
    _index(data_dir).write_bytes(_index(data_dir).read_bytes()[:40])
    code, after = _list_json(data_dir)
    assert code == 0 and len(json.loads(after)) == 6


def test_an_index_cut_under_a_running_store_is_noticed(data_dir, store, filled):
    assert len(store.pregnancies()) == 6
    _index(data_dir).write_bytes(b"")
    assert len(store.pregnancies()) == 6
    assert {r["id"] for r in store.iter_records()} == set(filled)


def test_a_short_index_that_cannot_be_rebuilt_is_refused_naming_the_repair(data_dir, filled, monkeypatch):
    from clinic.store import opening

    def read_only(*a, **kw):
        raise PermissionError(13, "Read-only file system")

    _index(data_dir).write_bytes(b"")
    monkeypatch.setattr(opening, "atomic_write_bytes", read_only)
    with pytest.raises(StoreCorrupt, match="rhledger check --repair"):
        Store(data_dir)


def test_check_repair_rebuilds_the_index(data_dir, filled):
    lines = _index(data_dir).read_text().splitlines()
    random.Random(3).shuffle(lines)
    _index(data_dir).write_text("\n".join(lines) + "\n")
    res = CliRunner().invoke(cli, ["check", "--repair", "--data", str(data_dir)])
    assert res.exit_code == 0, res.output
    assert "Index rebuilt" in res.output and "18 records" in res.output
    assert len(_index(data_dir).read_text().splitlines()) == 18
    _all_found(data_dir, filled)
