"""A woman's card, issued where she booked, imports at the facility that saw her later without
making a single new record: the demo's copies already carry the same ids (uuid5 of the story)."""
from __future__ import annotations

import shutil

import pytest

from seed_demo.scenario import pregnancy_id

MOVES = [("c-sensitised", "clinic-c", "hospital"),
         ("a-moved-to-b", "clinic-a", "clinic-b"),
         ("b-to-hospital", "clinic-b", "hospital")]


@pytest.mark.parametrize("key,issued_at,read_at", MOVES, ids=[m[0] for m in MOVES])
def test_card_import_adds_nothing(key, issued_at, read_at, demo_dirs, demo_now, tmp_path):
    from clinic.card.codec import read_card
    from clinic.card.importing import import_reading
    from clinic.card.issue import issue_card
    from clinic.config import load_settings
    from clinic.signing.trust import load_trust
    from clinic.store import Store

    src, dst = tmp_path / issued_at, tmp_path / read_at
    shutil.copytree(demo_dirs[issued_at], src)
    shutil.copytree(demo_dirs[read_at], dst)
    card = issue_card(src, Store(src), load_settings(src), pregnancy_id(key), now=demo_now)
    store = Store(dst)
    before = {r["id"] for r in store.iter_records()}
    reading = read_card(card.card.text, load_trust(dst))
    assert reading.trust == "trusted"
    result = import_reading(store, reading, data_dir=dst, now=demo_now)
    assert {r["id"] for r in store.iter_records()} == before
    assert set(result.counts) <= {"unchanged", "kept-local"}
