"""Suggested transfers between clinics: a lot that would expire unused at one, to a clinic that
runs short of the same product before that lot expires.

Pure, greedy. Repeatedly, the lot expiring soonest that has whole vials expiring unused at
some facility is offered to the facilities short of the same product (earliest stock-out
first). A transfer is proposed only when

- the lot arrives (today + ``transfer_days``) before its expiry date, and
- the receiving clinic would use the vials before they expire: its expected unmet need,
  re-simulated first-expiry-first with the lot arriving, goes down (the vials moved are that
  reduction, rounded up, at most the vials expiring unused at the source; a reduction below
  half a vial is not worth the trip), and
- the source clinic's own expected unmet need does not go up.

After each transfer both clinics are simulated again, so one lot may be split between
clinics and a clinic is not sent more than it can use.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import date, timedelta
from typing import Hashable, Sequence

from clinic.supply.errors import SupplyInputError
from clinic.supply.stock_plan import Lot, simulate, with_lot, without_vials

_EPS = 1e-9
# A trip is suggested only when it is expected to cover at least half a vial of need.
MIN_GAIN_VIALS = 0.5


@dataclass
class Position:
    """One facility's stock of one product and its expected use per day."""

    facility: str
    product: Hashable
    lots: list[Lot]
    daily: list[float]


@dataclass(frozen=True)
class Transfer:
    from_facility: str
    to_facility: str
    product: Hashable
    lot: str
    vials: int
    expiry: date
    arrives: date
    to_stockout_date: date | None     # the receiver's stock-out date before the transfer


def suggest_transfers(positions: Sequence[Position], *, start: date, transfer_days: int,
                      max_transfers: int = 200) -> tuple[list[Transfer], dict[tuple[str, Hashable], list[Lot]]]:
    """The transfers, and every position's lots after them (keyed by (facility, product))."""
    if not isinstance(transfer_days, int) or not 0 <= transfer_days <= 60:
        raise SupplyInputError("transfer_days", f"{transfer_days!r}: allowed range 0 to 60 days")
    lots = {(p.facility, p.product): list(p.lots) for p in positions}
    daily = {(p.facility, p.product): list(p.daily) for p in positions}
    arrives = start + timedelta(days=transfer_days)
    out: list[Transfer] = []
    while len(out) < max_transfers:
        sims = {k: simulate(lots[k], daily[k], start) for k in lots}
        done = False
        offers = sorted(((k, o) for k, s in sims.items() for o in s.lots
                         if o.arrives_day == 0 and o.expiring_unused > 0 and o.expiry > arrives),
                        key=lambda ko: (ko[1].expiry, ko[1].lot, ko[0][0]))
        for (src, prod), o in offers:
            takers = sorted((k for k, s in sims.items() if k[1] == prod and k[0] != src and s.unmet > _EPS),
                            key=lambda k: (sims[k].stockout_day, -sims[k].unmet, k[0]))
            for dst in takers:
                n = _vials_to_move(lots, daily, sims, (src, prod), dst, o.lot, o.expiry, o.expiring_unused,
                                   transfer_days, start)
                if n <= 0:
                    continue
                lots[(src, prod)] = without_vials(lots[(src, prod)], o.lot, n)
                lots[dst] = with_lot(lots[dst], Lot(o.lot, o.expiry, n, transfer_days, src))
                so = sims[dst].stockout_day
                out.append(Transfer(src, dst[0], prod, o.lot, n, o.expiry, arrives,
                                    None if so is None else start + timedelta(days=so)))
                done = True
                break
            if done:
                break
        if not done:
            break
    return out, lots


def _vials_to_move(lots, daily, sims, src, dst, lot: str, expiry: date, spare: int, transfer_days: int,
                   start: date) -> int:
    if start + timedelta(days=transfer_days) >= expiry:
        return 0    # it would arrive on or after its expiry date
    trial = simulate(with_lot(lots[dst], Lot(lot, expiry, spare, transfer_days, src[0])), daily[dst], start)
    gain = sims[dst].unmet - trial.unmet
    n = min(spare, int(math.ceil(gain - _EPS))) if gain >= MIN_GAIN_VIALS else 0
    while n > 0:
        after = simulate(without_vials(lots[src], lot, n), daily[src], start)
        if after.unmet <= sims[src].unmet + _EPS:
            break
        n -= 1
    return n
