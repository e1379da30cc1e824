"""The stock page's figures, from clinic.reports.stock (the one ledger rule for web and reports)."""
from __future__ import annotations

from datetime import timedelta

from flask import Flask

from clinic.reports.stock import EXPIRY_WARNING_DAYS, balances
from clinic.web.clock import now_local
from clinic.web.db import get_settings, get_store, utcnow


def on_hand(records) -> list:
    """LotBalance of every lot of this facility now, soonest expiry first."""
    fid = get_settings().facility_id
    # Movements recorded at "now" (the default of the form) count at once.
    return balances([r for r in records if r.get("facility") == fid], at=utcnow() + timedelta(seconds=1),
                    warn_days=EXPIRY_WARNING_DAYS, day=now_local().date())


def suggest_lot(product: str) -> dict | None:
    """The lot of ``product`` on hand that expires first and has not expired (for dose forms)."""
    for b in lots_on_hand():
        if b.product == product:
            return {"lot": b.lot, "lot_expiry": b.lot_expiry}
    return None


def lots_on_hand() -> list:
    """Lots with vials on hand and not expired (for the lot pickers of the dose and stock forms)."""
    return [b for b in on_hand(list(get_store().iter_records(kind="stock"))) if b.vials > 0 and not b.expired]


def init_app(app: Flask) -> None:
    app.add_template_global(lots_on_hand, "lots_on_hand")
