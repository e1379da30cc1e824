"""Importing records made elsewhere: newer copy wins, same content is unchanged, order never matters."""
from __future__ import annotations

import itertools
import json
from datetime import timedelta

import pytest

from clinic.records.validate import ValidationError
from clinic.store import Store
from tests.conftest import USERNAME, write_config


def _foreign_woman(version=1, village="Far Hill", amended_at=None, rid="far-woman-1"):
    rec = {"id": rid, "kind": "woman", "facility": "far-clinic", "woman_id": None, "pregnancy_id": None,
           "created_at": "2026-03-01T08:00:00Z", "created_by": "far-midwife", "amended_at": amended_at,
           "amended_by": "far-midwife" if amended_at else None, "version": version, "amendments": [],
           "origin": {"via": "bundle", "facility": "far-clinic"}, "schema": 1, "voided": False,
           "voided_reason": None, "name": "Neema Far Test", "stated_age": 27, "village": village}
    return rec


def test_new_record_is_created_with_its_envelope(store):
    assert store.merge_foreign(_foreign_woman()) == "created"
    got = store.get("far-woman-1")
    assert got["facility"] == "far-clinic" and got["created_by"] == "far-midwife" and got["version"] == 1
    assert got["origin"]["via"] == "bundle"


def test_same_record_again_is_unchanged(store):
    store.merge_foreign(_foreign_woman())
    assert store.merge_foreign(_foreign_woman()) == "unchanged"
    assert len(store.audit("far-woman-1")) == 1


def test_higher_version_wins_and_local_newer_is_kept(store):
    store.merge_foreign(_foreign_woman())
    assert store.merge_foreign(_foreign_woman(2, "Near Hill", "2026-03-05T08:00:00Z")) == "updated"
    assert store.get("far-woman-1")["village"] == "Near Hill"
    assert store.merge_foreign(_foreign_woman(1)) == "kept-local"
    assert store.get("far-woman-1")["village"] == "Near Hill"


def test_local_amendment_is_kept_against_an_older_import(store, now):
    store.merge_foreign(_foreign_woman())
    store.amend("far-woman-1", {"village": "Amended Here"}, by=USERNAME, reason="moved", now=now)
    assert store.merge_foreign(_foreign_woman()) == "kept-local"
    assert store.get("far-woman-1")["village"] == "Amended Here"


def test_same_version_later_amended_at_wins(store):
    store.merge_foreign(_foreign_woman(2, "Early", "2026-03-05T08:00:00Z"))
    assert store.merge_foreign(_foreign_woman(2, "Late", "2026-03-06T08:00:00Z")) == "updated"
    assert store.merge_foreign(_foreign_woman(2, "Early", "2026-03-05T08:00:00Z")) == "kept-local"


def _state(store):
    return sorted(json.dumps({k: v for k, v in r.items()}, sort_keys=True) for r in store.iter_records())


def _merged_state(tmp_path, password_hash, name, copies):
    d = tmp_path / name
    write_config(d, password_hash)
    s = Store(d)
    for c in copies:
        s.merge_foreign(c)
    return _state(s)


COPIES = [_foreign_woman(1), _foreign_woman(2, "B", "2026-03-05T08:00:00Z"),
          _foreign_woman(2, "C", "2026-03-05T08:00:00Z"),  # a true tie with B: content decides
          _foreign_woman(2, "A", "2026-03-04T08:00:00Z")]


@pytest.mark.parametrize("order", list(itertools.permutations(range(4))))
def test_import_order_does_not_change_the_result(tmp_path, password_hash, order):
    reference = _merged_state(tmp_path, password_hash, "ref", COPIES)
    assert _merged_state(tmp_path, password_hash, "perm", [COPIES[i] for i in order]) == reference
    assert json.loads(reference[0])["village"] == "C"


def test_entries_before_their_pregnancy_are_found_once_it_arrives(store):
    preg = {"id": "far-preg-1", "kind": "pregnancy", "facility": "far-clinic", "woman_id": "far-woman-1",
            "pregnancy_id": None, "created_at": "2026-03-01T08:00:00Z", "created_by": "far", "amended_at": None,
            "amended_by": None, "version": 1, "amendments": [], "origin": None, "schema": 1, "voided": False,
            "voided_reason": None, "booked_on": "2026-03-01", "lmp": "2025-12-20", "status": "ongoing"}
    typing = {**{k: preg[k] for k in ("facility", "woman_id", "created_at", "created_by", "amended_at",
                                      "amended_by", "version", "amendments", "origin", "schema", "voided",
                                      "voided_reason")},
              "id": "far-typing-1", "kind": "typing", "pregnancy_id": "far-preg-1",
              "abo": "O", "rhd": "negative", "tested_on": "2026-03-01"}
    assert store.merge_foreign(typing) == "created"
    assert store.merge_foreign(preg) == "created"
    assert store.merge_foreign(_foreign_woman()) == "created"
    woman, p, entries = store.history("far-preg-1")
    assert [e["id"] for e in entries] == ["far-typing-1"] and woman["id"] == "far-woman-1"


def test_invalid_foreign_record_is_refused_naming_the_field(store):
    bad = _foreign_woman()
    bad["stated_age"] = 200
    bad["facility"] = "../etc"
    bad["version"] = 0
    with pytest.raises(ValidationError) as e:
        store.merge_foreign(bad)
    assert {"stated_age", "facility", "version"} <= set(e.value.errors)
    assert store.get("far-woman-1") is None


def test_canonical_values_are_recomputed_on_import(store):
    dose = {"id": "far-dose-1", "kind": "dose", "facility": "far-clinic", "woman_id": "w", "pregnancy_id": "p",
            "created_at": "2026-03-01T08:00:00Z", "created_by": "far", "amended_at": None, "amended_by": None,
            "version": 1, "amendments": [], "origin": None, "schema": 1, "voided": False, "voided_reason": None,
            "given_at": "2026-03-01T07:00:00Z", "amount": 300, "unit": "ug", "route": "IM", "lot": "L",
            "lot_expiry": "2027-01-01", "indication": "sensitising-event", "given_by": "far", "dose_iu": 999}
    store.merge_foreign(dose)
    # 300 µg x 5 (BSH 2014, Qureshi et al., Transfus Med 2014;24:8-20)
    assert store.get("far-dose-1")["dose_iu"] == 1500


def test_later_local_now_does_not_matter(store, now):
    store.merge_foreign(_foreign_woman(), now=now + timedelta(days=1))
    assert store.merge_foreign(_foreign_woman(), now=now) == "unchanged"


def test_check_foreign_validates_without_writing(store, data_dir):
    before = sorted(p.name for p in (data_dir / "records").rglob("*"))
    out = store.check_foreign(_foreign_woman())
    assert out["name"] == "Neema Far Test" and out["schema"] == 1
    with pytest.raises(ValidationError) as e:
        store.check_foreign({**_foreign_woman(), "created_at": "yesterday"})
    assert "created_at" in e.value.errors
    assert sorted(p.name for p in (data_dir / "records").rglob("*")) == before
