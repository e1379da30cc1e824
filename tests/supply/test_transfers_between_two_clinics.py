"""A district of two clinics: clinic B holds a lot that would expire unused, clinic A runs out
before that lot expires: the lot moves, as many vials as A will use, and never a lot that would
arrive on or after its expiry date."""
from __future__ import annotations

from datetime import date

import pytest

from clinic.supply.report import build_report
from tests.supply import dataset as ds


def _report(transfer_days=3):
    return build_report(ds.district_inputs(), now=ds.NOW, start=ds.START, weeks=12, percentile=90,
                        transfer_days=transfer_days)


def test_before_any_transfer():
    rep = _report()
    a, b = rep.row(ds.A, ds.V500), rep.row(ds.B, ds.V500)
    # A: stock-out on 23 Jul (test_stock_used_first_expiry_first); L-EARLY leaves 1 vial unused
    assert a.stock.stockout_date == date(2026, 7, 23) and a.stock.expiring_unused_vials == 1
    # B needs 2 vials (days 5 and 47). B-SOON expires on day 2 before any of them: 5 unused.
    # B-SPARE gives both: 4 - 2 = 2 unused on 31 Jul. B never runs short.
    assert [(o.lot, o.used, o.expiring_unused) for o in b.stock.lots] == [("B-SOON", 0, 5), ("B-SPARE", 2, 2)]
    assert b.stock.stockout_date is None and b.stock.expiring_unused_vials == 7


def test_one_vial_of_b_spare_moves_to_a():
    rep = _report()
    # Offered first by expiry: B-SOON (3 Jun) arrives 4 Jun, after its expiry: never offered;
    # L-EARLY (A's own, 20 Jun): nobody else is short. B-SPARE (31 Jul) to A, arriving 4 Jun:
    # A then uses L-EARLY to day 19, B-SPARE from day 20, L-LATE last. A's expected shortfall
    # was 64 x 3/365 + 2.3143 - 2 = 0.8403 vials; with the lot it is 0, so 1 vial (0.8403 rounded
    # up) moves, and B, still holding 3 for its 2 doses, is not left short.
    assert [(t.from_facility, t.to_facility, t.lot, t.vials, t.expiry, t.arrives, t.to_stockout_date)
            for t in rep.transfers] == [(ds.B, ds.A, "B-SPARE", 1, date(2026, 7, 31), date(2026, 6, 4),
                                         date(2026, 7, 23))]
    a, b = rep.row(ds.A, ds.V500), rep.row(ds.B, ds.V500)
    assert (a.transfer_in, a.transfer_out, b.transfer_in, b.transfer_out) == (1, 0, 0, 1)
    # after it: A has no stock-out in the 12 weeks; B still covers its doses
    assert a.after.stockout_date is None and a.after.unmet_vials == 0
    assert b.after.stockout_date is None and b.after.expiring_unused_vials == 5 + 1


def test_a_lot_arriving_on_its_expiry_date_does_not_move():
    # 60 days on the road: B-SPARE would arrive on 31 Jul, its expiry date
    assert _report(transfer_days=60).transfers == []


def test_a_lot_arriving_too_late_to_be_used_does_not_move():
    # 59 days: it arrives on 30 Jul, A has been short since 23 Jul, and before 31 Jul A would use
    # only 2 days of events from it (2 x 0.0082 vials): not worth the trip.
    assert _report(transfer_days=59).transfers == []


@pytest.mark.parametrize("days", [-1, 61])
def test_transfer_days_out_of_range(days):
    from clinic.supply.errors import SupplyInputError

    with pytest.raises(SupplyInputError) as e:
        _report(transfer_days=days)
    assert e.value.errors["transfer_days"].endswith("allowed range 0 to 60 days")
