"""The synthetic benchmark data is reproducible from its seed, valid, and has every kind of entry."""
from __future__ import annotations

from collections import Counter

import pytest

from seed_demo.synthetic import SyntheticError, build_synthetic, main


def _records(d):
    from clinic.store import Store

    return {r["id"]: r for r in Store(d).iter_records()}


def test_same_seed_same_records(tmp_path, demo_now):
    # One booking a month: a year of history, so there are births and postpartum doses too.
    a = build_synthetic(tmp_path / "a", facilities=2, pregnancies=14, seed=7, now=demo_now, per_month=1,
                        rhd_negative_share=0.6)
    build_synthetic(tmp_path / "b", facilities=2, pregnancies=14, seed=7, now=demo_now, per_month=1,
                    rhd_negative_share=0.6)
    ra, rb = _records(tmp_path / "a"), _records(tmp_path / "b")
    assert ra == rb and len(ra) == a["records"]
    kinds = Counter(r["kind"] for r in ra.values())
    assert {"woman", "pregnancy", "typing", "screen", "dose", "birth"} <= set(kinds)
    assert kinds["pregnancy"] == 28
    assert {r["facility"] for r in ra.values()} == {"synth-001", "synth-002"}
    assert all(r["phone"].startswith("+000 ") for r in ra.values() if r["kind"] == "woman")


def test_other_seed_other_records(tmp_path, demo_now):
    build_synthetic(tmp_path / "a", facilities=1, pregnancies=4, seed=1, now=demo_now)
    build_synthetic(tmp_path / "b", facilities=1, pregnancies=4, seed=2, now=demo_now)
    a, b = _records(tmp_path / "a"), _records(tmp_path / "b")
    assert [r.get("name") for r in a.values() if r["kind"] == "woman"] != \
           [r.get("name") for r in b.values() if r["kind"] == "woman"]


def test_cli_writes_and_refuses_a_non_empty_folder(tmp_path, capsys):
    assert main(["--facilities", "2", "--pregnancies", "3", "--out", str(tmp_path / "s")]) == 0
    assert "6 pregnancies in 2 facilities" in capsys.readouterr().out
    assert main(["--facilities", "1", "--pregnancies", "1", "--out", str(tmp_path / "s")]) == 1
    assert "not empty" in capsys.readouterr().err


def test_sizes_must_be_positive(tmp_path):
    with pytest.raises(SyntheticError):
        build_synthetic(tmp_path / "z", facilities=0, pregnancies=10)


def test_force_deletes_only_synthetic_data(tmp_path):
    d = tmp_path / "clinic"
    d.mkdir()
    (d / "config.toml").write_text('[facility]\nid = "real-clinic"\n', encoding="utf-8")
    with pytest.raises(SyntheticError, match="not deleted"):
        build_synthetic(d, facilities=1, pregnancies=1, force=True)
    assert (d / "config.toml").exists()


def test_bulk_and_create_leave_the_same_records(tmp_path, demo_now):
    """The fast path (Store.merge_foreign_many) stores exactly what Store.create/amend would."""
    kw = dict(facilities=2, pregnancies=12, seed=5, now=demo_now, per_month=1, rhd_negative_share=0.7)
    a = build_synthetic(tmp_path / "bulk", via="bulk", **kw)
    build_synthetic(tmp_path / "create", via="create", **kw)
    assert a["amendments"] > 0  # births happened, so amended pregnancies are compared too
    assert _records(tmp_path / "bulk") == _records(tmp_path / "create")
