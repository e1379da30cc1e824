"""The per-facility anti-D stock ledger: balances per lot and lots close to expiry.

Stock records (kind ``stock``) are movements: ``received`` adds vials; ``given``,
``discarded`` and ``cold-chain-break`` take vials away; ``count-correction`` records a
physical count, which becomes the lot's balance from that moment. Balances are per
facility, product, vial size and lot.
"""
from __future__ import annotations

from dataclasses import dataclass
from datetime import date, datetime, timedelta

from clinic.records.values import parse_utc

OUT_MOVES = ("given", "discarded", "cold-chain-break")
# A lot on hand that expires within this many days is flagged (stock page and monthly report).
EXPIRY_WARNING_DAYS = 60


@dataclass
class LotBalance:
    facility: str
    product: str
    vial_iu: int
    lot: str
    lot_expiry: str
    vials: int
    received: int = 0
    given: int = 0
    discarded: int = 0
    cold_chain_break: int = 0
    expires_soon: bool = False
    expired: bool = False

    @property
    def iu(self) -> int:
        return self.vials * self.vial_iu


def balances(
    records, *, at: datetime, warn_days: int = EXPIRY_WARNING_DAYS, day: date | None = None
) -> list[LotBalance]:
    """Balance of every lot at each facility at instant ``at`` (movements before it).

    ``expires_soon``: on hand, and the lot expires within ``warn_days`` days of ``at``;
    ``expired``: on hand past its expiry date. ``day`` is the local date of ``at``.
    """
    lots: dict[tuple, LotBalance] = {}
    moves = sorted(
        (r for r in records if r.get("kind") == "stock" and not r.get("voided")),
        key=lambda r: (r["at"], r.get("id", "")),
    )
    for r in moves:
        if parse_utc(r["at"]) >= at:
            continue
        key = (r.get("facility", ""), r["product"], r["vial_iu"], r["lot"])
        b = lots.get(key)
        if b is None:
            b = lots[key] = LotBalance(key[0], r["product"], r["vial_iu"], r["lot"], r["lot_expiry"], 0)
        n = int(r["vials"])
        move = r["move"]
        if move == "received":
            b.vials += n
            b.received += n
        elif move in OUT_MOVES:
            b.vials -= n
            setattr(b, move.replace("-", "_"), getattr(b, move.replace("-", "_")) + n)
        elif move == "count-correction":
            b.vials = n
        else:
            raise ValueError(f"stock record {r.get('id')} has an unknown movement {move!r}")
    day = day or at.date()
    soon = day + timedelta(days=warn_days)
    for b in lots.values():
        exp = date.fromisoformat(b.lot_expiry)
        b.expired = b.vials > 0 and exp < day
        b.expires_soon = b.vials > 0 and day <= exp <= soon
    return sorted(lots.values(), key=lambda b: (b.facility, b.lot_expiry, b.lot))
