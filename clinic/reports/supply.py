"""From the store to the supply report: plans, event history and stock lots per facility.

A clinic's installation forecasts its own facility; a district installation forecasts every
facility whose bundles it imported, each planned with that facility's own profile and
products (``clinic.reports.cases``), and suggests transfers between them. The figures are
made by ``clinic.supply`` (pure).
"""
from __future__ import annotations

from collections import defaultdict
from datetime import date, datetime, timedelta
from pathlib import Path

from clinic.reports.bundle import facility_care
from clinic.reports.cases import facility_names_from_trust, load_inputs
from clinic.reports.month import Month
from clinic.reports.stock import balances
from clinic.supply.forecast import DAYS_PER_WEEK, EVENT_LOOKBACK_DAYS, ProductKey, event_rate, needs_of_plan
from clinic.supply.report import FacilityInput, SupplyReport, build_report
from clinic.supply.stock_plan import Lot


def _products(fid: str, settings, care: dict) -> list[ProductKey]:
    if fid in care:
        return [ProductKey(str(p["name"]), int(p["vial_iu"])) for p in care[fid]["care"].get("products", [])]
    if fid == settings.facility_id:
        return [ProductKey(p.name, p.vial_iu) for p in settings.products]
    return []


def supply_report(store, data_dir: Path, *, now: datetime, weeks: int | None = None) -> SupplyReport:
    """The forecast as of ``now`` for ``weeks`` weeks (default: config.toml [supply] horizon_weeks)."""
    settings = store.settings
    sup = settings.supply
    weeks = sup.horizon_weeks if weeks is None else weeks
    tz = settings.tz
    start = now.astimezone(tz).date()
    care = facility_care(data_dir)
    names = facility_names_from_trust(data_dir)
    # The event rate looks back a year: every pregnancy that can count since then is planned.
    first = Month.of(now - timedelta(days=EVENT_LOOKBACK_DAYS + 1), tz)
    inp = load_inputs(store, settings, now=now, first_month=first, facility_care=care, facility_names=names)
    own = settings.facility_id
    stock_by: dict[str, list[dict]] = defaultdict(list)
    for r in inp.stock:
        stock_by[r.get("facility", "")].append(r)
    if settings.facility_kind == "district":
        fids = sorted((set(inp.facilities) | set(care)) - ({own} if not stock_by.get(own) else set()))
    else:
        fids = [own]
    cases_by: dict[str, list] = defaultdict(list)
    for c in inp.cases:
        # Her next dose is most likely given where she was seen last.
        cases_by[c.last_facility].append(c)
    history = [(c.plan, {e["id"]: e.get("facility", "") for e in c.entries if e.get("kind") == "event"})
               for c in inp.cases]
    days = weeks * DAYS_PER_WEEK
    inputs = []
    for fid in fids:
        needs = [n for c in cases_by.get(fid, [])
                 for n in needs_of_plan(c.plan, pregnancy=c.pregnancy, start=start, days=days, tz=tz)]
        lots: dict[ProductKey, list[Lot]] = defaultdict(list)
        for b in balances(stock_by.get(fid, []), at=now + timedelta(seconds=1), day=start):
            if b.vials > 0:
                lots[ProductKey(b.product, b.vial_iu)].append(Lot(b.lot, date.fromisoformat(b.lot_expiry), b.vials))
        inputs.append(FacilityInput(
            fid, inp.facility_names.get(fid) or (settings.facility_name if fid == own else fid), needs,
            event_rate(history, facility=fid, now=now), _products(fid, settings, care), dict(lots),
            sup.lead_time_for(fid), inp.profiles.get(fid, "")))
    return build_report(inputs, now=now, start=start, weeks=weeks, percentile=sup.upper_percentile,
                        transfer_days=sup.transfer_days)
