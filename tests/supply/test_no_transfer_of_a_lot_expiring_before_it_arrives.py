"""Whatever the district, a suggested transfer always arrives before the lot's expiry date,
moves no more than the source would leave unused, leaves no clinic worse off, and is used at
the receiver (its expected shortfall goes down). Random districts, seeded by Hypothesis."""
from __future__ import annotations

from datetime import timedelta

from hypothesis import given, settings
from hypothesis import strategies as st

from clinic.supply.stock_plan import Lot, simulate
from clinic.supply.transfers import Position, suggest_transfers
from tests.supply.dataset import START, V500, V1500

DAYS = 56

lots = st.lists(st.tuples(st.integers(-5, 80), st.integers(0, 12)), min_size=0, max_size=4)
demand = st.lists(st.sampled_from([0.0, 0.0, 0.0, 0.05, 0.3, 1.0, 2.0]), min_size=DAYS, max_size=DAYS)
clinic = st.tuples(lots, demand, st.sampled_from([V500, V1500]))


@settings(max_examples=150, deadline=None)
@given(st.lists(clinic, min_size=2, max_size=5), st.integers(0, 10))
def test_transfers_respect_expiry_and_need(clinics, transfer_days):
    positions = []
    for i, (ls, daily, prod) in enumerate(clinics):
        positions.append(Position(f"c{i}", prod, [Lot(f"c{i}-L{j}", START + timedelta(days=e), n)
                                                  for j, (e, n) in enumerate(ls)], list(daily)))
    before = {(p.facility, p.product): simulate(p.lots, p.daily, START) for p in positions}
    transfers, after_lots = suggest_transfers(positions, start=START, transfer_days=transfer_days)
    by_key = {(p.facility, p.product): p for p in positions}
    for t in transfers:
        assert t.arrives == START + timedelta(days=transfer_days)
        assert t.arrives < t.expiry, t                           # never a lot that expires before it arrives
        assert t.vials >= 1 and t.from_facility != t.to_facility
        assert (t.to_facility, t.product) in by_key               # same product at both ends
        unused = {o.lot: o.expiring_unused for o in before[(t.from_facility, t.product)].lots}
        assert sum(x.vials for x in transfers if x.lot == t.lot) <= unused[t.lot]
    for key, p in by_key.items():
        after = simulate(after_lots[key], p.daily, START)
        assert after.unmet <= before[key].unmet + 1e-9            # nobody is left shorter
        if any(t.to_facility == key[0] and t.product == key[1] for t in transfers):
            assert after.unmet < before[key].unmet - 0.4         # the receiver uses what it gets
