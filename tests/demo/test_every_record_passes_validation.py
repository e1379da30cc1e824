"""Every demo record is what the validation layer would store: canonical, and in the past."""
from __future__ import annotations

from datetime import timedelta

import pytest

from clinic.records.schema import KINDS
from clinic.records.validate import validate_record
from clinic.records.values import parse_utc
from seed_demo.scenario import FACILITY_SITES


@pytest.mark.parametrize("site", FACILITY_SITES)
def test_every_record_revalidates_unchanged(site, demo_stores, demo_now):
    from clinic.store import fields_of

    store = demo_stores[site]
    n = 0
    for rec in store.iter_records():
        assert rec["kind"] in KINDS
        made = parse_utc(rec["created_at"])
        assert made <= demo_now
        fields = fields_of(rec)
        again = validate_record(rec["kind"], {k: v for k, v in fields.items() if k in KINDS[rec["kind"]].field_names},
                                now=demo_now, tz=store.tz)
        assert again == fields, f"{rec['kind']} {rec['id']} is not canonical"
        n += 1
    assert n > 0


@pytest.mark.parametrize("site", FACILITY_SITES)
def test_no_record_is_dated_after_it_was_entered(site, demo_stores):
    """An entry cannot describe a moment after the moment it was typed in."""
    store = demo_stores[site]
    for rec in store.iter_records():
        spec = KINDS[rec["kind"]]
        made = parse_utc(rec["created_at"]) + timedelta(minutes=10)
        for f in spec.fields:
            if f.type == "datetime" and f.not_future and rec.get(f.name):
                assert parse_utc(rec[f.name]) <= made, f"{rec['kind']}.{f.name} of {rec['id']}"


@pytest.mark.parametrize("site", FACILITY_SITES)
def test_store_check_finds_no_problem(site, demo_stores, demo_now):
    report = demo_stores[site].check(now=demo_now)
    assert report.problems == []
