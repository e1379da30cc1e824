"""Stock against the forecast: first-expiry-first use, the stock-out date, lots that expire
unused, and the order to place for the facility's lead time.

Pure. The forecast's expected vials per day are taken, day by day, from the lot on hand
that expires first (first-expiry-first-out, common practice for short-dated medicines).
A lot is usable up to and including its expiry date; whatever is left of it after that day
expires unused. Fractions of a vial are expected values: a lot "expires unused" by the whole
vials still left on its expiry date.

- ``stockout_date``: the first day whose expected use the usable stock cannot cover;
- ``expiring_unused_vials``: whole vials of lots that expire inside the horizon before the
  forecast uses them;
- ``order_vials``: the upper figure of the forecast less the vials that will be used
  before they expire (never below 0), so that an order placed now covers the horizon at the
  upper figure; ``order_by`` = the stock-out date less the lead time (not before today), and
  ``order_urgent`` when an order placed today would arrive after the stock-out.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from datetime import date, timedelta
from typing import Sequence

from clinic.supply.errors import SupplyInputError

_EPS = 1e-9


@dataclass(frozen=True)
class Lot:
    lot: str
    expiry: date
    vials: int
    arrives_day: int = 0        # 0: on hand today; a transfer arrives later
    source: str = ""            # facility it comes from, for a transfer in


@dataclass
class LotOutcome:
    lot: str
    expiry: date
    vials: int
    used: float
    left: float
    expires_in_horizon: bool
    arrives_day: int = 0
    source: str = ""

    @property
    def expiring_unused(self) -> int:
        """Whole vials left on the expiry date of a lot that expires inside the horizon."""
        return int(math.floor(self.left + _EPS)) if self.expires_in_horizon else 0


@dataclass
class Simulation:
    lots: list[LotOutcome]
    unmet: float
    stockout_day: int | None


@dataclass
class StockPlan:
    on_hand_vials: int
    expired_vials: int
    lots: list[LotOutcome]
    unmet_vials: float
    stockout_date: date | None
    expiring_unused_vials: int
    usable_vials: int
    order_vials: int
    order_by: date | None
    order_urgent: bool
    lead_time_days: int
    expired_lots: list[Lot] = field(default_factory=list)


def simulate(lots: Sequence[Lot], daily: Sequence[float], start: date) -> Simulation:
    """Use ``daily`` expected vials from ``lots``, first expiry first, from ``start`` on."""
    days = len(daily)
    last = start + timedelta(days=days - 1) if days else start
    left = {i: float(max(0, lot.vials)) for i, lot in enumerate(lots)}
    used = {i: 0.0 for i in left}
    order = sorted(range(len(lots)), key=lambda i: (lots[i].expiry, lots[i].arrives_day, lots[i].lot, i))
    unmet, stockout = 0.0, None
    for d in range(days):
        today = start + timedelta(days=d)
        need = float(daily[d])
        for i in order:
            if need <= _EPS:
                break
            lot = lots[i]
            if lot.arrives_day > d or lot.expiry < today or left[i] <= _EPS:
                continue
            take = min(need, left[i])
            left[i] -= take
            used[i] += take
            need -= take
        if need > _EPS:
            unmet += need
            if stockout is None:
                stockout = d
    out = [LotOutcome(lot.lot, lot.expiry, lot.vials, used[i], left[i], lot.expiry <= last, lot.arrives_day,
                      lot.source) for i, lot in enumerate(lots)]
    return Simulation(out, unmet, stockout)


def plan_stock(lots: Sequence[Lot], daily: Sequence[float], *, start: date, upper_vials: int,
               lead_time_days: int) -> StockPlan:
    """The stock plan of one product at one facility."""
    if not isinstance(lead_time_days, int) or not 0 <= lead_time_days <= 180:
        raise SupplyInputError("lead_time_days", f"{lead_time_days!r}: allowed range 0 to 180 days")
    expired = [lot for lot in lots if lot.expiry < start and lot.vials > 0]
    usable = [lot for lot in lots if lot.expiry >= start and lot.vials > 0]
    sim = simulate(usable, daily, start)
    on_hand = sum(lot.vials for lot in usable if lot.arrives_day == 0)
    unused = sum(o.expiring_unused for o in sim.lots)
    keep = sum(lot.vials for lot in usable) - unused
    stockout = None if sim.stockout_day is None else start + timedelta(days=sim.stockout_day)
    order = max(0, int(upper_vials) - keep)
    order_by = None
    urgent = False
    if stockout is not None:
        order_by = max(start, stockout - timedelta(days=lead_time_days))
        urgent = stockout < start + timedelta(days=lead_time_days)
        order = max(order, 1)
    return StockPlan(on_hand, sum(lot.vials for lot in expired), sim.lots, sim.unmet, stockout, unused, keep,
                     order, order_by, urgent, lead_time_days, expired)


def with_lot(lots: Sequence[Lot], lot: Lot) -> list[Lot]:
    return [*lots, lot]


def without_vials(lots: Sequence[Lot], name: str, vials: int) -> list[Lot]:
    """``lots`` with ``vials`` fewer vials of lot ``name`` (a transfer out)."""
    out = []
    for lot in lots:
        if lot.lot == name and lot.arrives_day == 0 and vials > 0:
            take = min(vials, lot.vials)
            vials -= take
            lot = replace(lot, vials=lot.vials - take)
        out.append(lot)
    return out
