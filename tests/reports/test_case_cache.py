"""The district's cases kept between reports (clinic.reports.case_cache) give the report a fresh
load would give: later on the same records (most plans reused, the ones past a turning point
made again), and after records change (only the changed partition read again, only its
pregnancies planned again), whichever Store object or process made the change."""
from __future__ import annotations

import shutil
from datetime import timedelta

from clinic.reports.case_cache import CaseCache
from clinic.reports.coverage import INDICATORS, compute_month, compute_trend
from clinic.store import Store
from tests.reports import dataset as ds
from tests.reports.conftest import NOVEMBER


def _load(cache, store, now):
    return cache.load(store, store.settings, now=now, first_month=NOVEMBER.shift(-11))


def _same(a, b, now, tz=ds.TZ) -> None:
    """Two inputs give the same cases, plans, month report and trend."""
    assert [c.id for c in a.cases] == [c.id for c in b.cases]
    for x, y in zip(a.cases, b.cases, strict=True):
        assert x.plan.to_dict() == y.plan.to_dict(), x.id
        assert (x.woman, x.pregnancy, x.entries) == (y.woman, y.pregnancy, y.entries)
    assert (a.stock, a.facilities, a.profiles) == (b.stock, b.facilities, b.profiles)
    ra = compute_month(a.cases, NOVEMBER, tz, now=now, stock_records=a.stock, facilities=a.facilities)
    rb = compute_month(b.cases, NOVEMBER, tz, now=now, stock_records=b.stock, facilities=b.facilities)
    for f in ra.columns:
        for i in INDICATORS:
            ca, cb = ra.cell(f, i.id), rb.cell(f, i.id)
            assert (ca.numerator, ca.denominator, ca.outcomes) == (cb.numerator, cb.denominator, cb.outcomes)
    assert [(u.pregnancy_id, u.indicator, u.outcome, u.what) for u in ra.follow_up] == \
        [(u.pregnancy_id, u.indicator, u.outcome, u.what) for u in rb.follow_up]
    ta = compute_trend(a.cases, NOVEMBER, tz, now=now, facilities=ra.facilities)
    tb = compute_trend(b.cases, NOVEMBER, tz, now=now, facilities=rb.facilities)
    for m in ta:
        for f in ta[m].columns:
            for i in INDICATORS:
                assert ta[m].cell(f, i.id).numerator == tb[m].cell(f, i.id).numerator, (m, f, i.id)


def test_later_reports_on_the_same_records_reuse_plans_and_agree_with_a_fresh_load(truth_store):
    cache = CaseCache()
    first = _load(cache, truth_store, ds.NOW)
    total = cache.last["planned"]
    assert total == len(first.cases) and cache.last["partitions_read"] > 0
    for later in (timedelta(hours=1), timedelta(days=1, hours=3), timedelta(days=9), timedelta(days=40)):
        now = ds.NOW + later
        kept = _load(cache, truth_store, now)
        assert cache.last["partitions_read"] == 0
        assert cache.last["reused"] + cache.last["planned"] == len(kept.cases)
        _same(kept, _load(CaseCache(), truth_store, now), now)
    assert cache.last["reused"] > 0
    # An hour on, nearly nothing has a turning point: almost every plan is reused.
    _load(cache, truth_store, ds.NOW + timedelta(days=40, hours=1))
    assert cache.last["planned"] <= len(first.cases) // 10


def test_a_change_is_read_and_planned_again_and_nothing_else(truth_store, tmp_path):
    d = tmp_path / "district"
    shutil.copytree(truth_store.data_dir, d)
    store = Store(d)
    cache = CaseCache()
    before = _load(cache, store, ds.NOW)
    dose = next(e for c in before.cases for e in c.entries if e["kind"] == "dose")
    # Another Store object (another process, say a bundle import) voids the dose.
    Store(d).void(dose["id"], by="district-test", reason="entered twice", now=ds.NOW)
    after = _load(cache, store, ds.NOW + timedelta(minutes=5))
    assert cache.last["partitions_read"] == 1
    assert 1 <= cache.last["planned"] < len(before.cases) // 2
    changed = next(c for c in after.cases if c.id == dose["pregnancy_id"])
    assert dose["id"] not in {e["id"] for e in changed.entries}
    _same(after, _load(CaseCache(), Store(d), ds.NOW + timedelta(minutes=5)), ds.NOW + timedelta(minutes=5))
