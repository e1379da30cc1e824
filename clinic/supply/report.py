"""The supply report of one facility or a district: forecast, stock plan and transfers together.

Pure: the caller (clinic.reports.supply) reads the store, the bundles' settings and the stock
ledger, and hands each facility's doses, event rate, products and lots to ``build_report``.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date, datetime
from typing import Sequence

from clinic.supply.forecast import (
    DAYS_PER_WEEK,
    DoseNeed,
    EventRate,
    ProductForecast,
    ProductKey,
    births_quantile,
    forecast_products,
)
from clinic.supply.poisson import poisson_quantile
from clinic.supply.stock_plan import Lot, StockPlan, plan_stock
from clinic.supply.transfers import Position, Transfer, suggest_transfers

CAUTION = ("A forecast is an estimate from the records entered: a booking, birth or event not recorded is not "
           "counted, and a woman may give birth or come for her dose elsewhere. Confirm stock, orders and "
           "transfers with the pharmacy (and the cold chain) before acting on them.")
METHOD = ("Known doses (due now, or routine and repeat windows opening) count in full; births count on the EDD, "
          "weighted by the chance that the baby is RhD positive; events at the clinic's own rate over the last "
          "12 months. The upper figure adds the {p:g}th percentile of a Poisson count of births (at most the births "
          "counted) and of events. "
          "Stock is used first-expiry-first at the expected rate.")


@dataclass
class FacilityInput:
    facility: str
    name: str
    needs: list[DoseNeed]
    rate: EventRate
    products: list[ProductKey]
    lots: dict[ProductKey, list[Lot]]
    lead_time_days: int
    planned_with: str = ""


@dataclass
class ProductRow:
    facility: str
    product: ProductKey
    forecast: ProductForecast
    stock: StockPlan                  # before any transfer
    after: StockPlan | None = None    # with the suggested transfers in and out
    transfer_in: int = 0
    transfer_out: int = 0


@dataclass
class FacilitySupply:
    facility: str
    name: str
    rate: EventRate
    lead_time_days: int
    rows: list[ProductRow]
    expected_doses: float
    upper_doses: int
    known_doses: int
    planned_with: str = ""
    notes: list[str] = field(default_factory=list)


@dataclass
class SupplyReport:
    made_at: datetime
    start: date
    weeks: int
    percentile: float
    transfer_days: int
    facilities: list[FacilitySupply]
    transfers: list[Transfer]
    caution: str = CAUTION

    @property
    def method(self) -> str:
        return METHOD.format(p=self.percentile)

    def name_of(self, facility: str) -> str:
        for f in self.facilities:
            if f.facility == facility:
                return f.name
        return facility

    def rows(self) -> list[ProductRow]:
        return [r for f in self.facilities for r in f.rows]

    def row(self, facility: str, product: ProductKey) -> ProductRow | None:
        for r in self.rows():
            if r.facility == facility and r.product == product:
                return r
        return None


def _doses(needs: Sequence[DoseNeed], rate: EventRate, days: int, q: float) -> tuple[float, int, int]:
    known = sum(1 for n in needs if n.known)
    chances = [n.weight for n in needs if not n.known]
    mu_b = sum(chances)
    mu_e = rate.count * days / rate.days if rate.days else 0.0
    upper = known + births_quantile(q, chances) + (poisson_quantile(q, mu_e) if mu_e else 0)
    return known + mu_b + mu_e, upper, known


def build_report(inputs: Sequence[FacilityInput], *, now: datetime, start: date, weeks: int,
                 percentile: float, transfer_days: int) -> SupplyReport:
    days = weeks * DAYS_PER_WEEK
    facilities: list[FacilitySupply] = []
    positions = []
    for fi in inputs:
        products = list(dict.fromkeys([*fi.products, *fi.lots]))
        forecasts = forecast_products(fi.needs, fi.rate, products, start=start, weeks=weeks, percentile=percentile)
        rows = []
        for fc in forecasts:
            lots = list(fi.lots.get(fc.product, []))
            sp = plan_stock(lots, fc.daily, start=start, upper_vials=fc.upper_vials, lead_time_days=fi.lead_time_days)
            rows.append(ProductRow(fi.facility, fc.product, fc, sp))
            positions.append(Position(fi.facility, fc.product, lots, fc.daily))
        expected, upper, known = _doses(fi.needs, fi.rate, days, percentile / 100.0)
        notes = []
        if not products:
            notes.append("no stocked product is known for this facility (config.toml [stock] products, or its "
                         "bundle): doses are shown, vials cannot be")
        facilities.append(FacilitySupply(fi.facility, fi.name, fi.rate, fi.lead_time_days, rows, expected, upper,
                                         known, fi.planned_with, notes))
    transfers, after = suggest_transfers(positions, start=start, transfer_days=transfer_days)
    if transfers:
        for f in facilities:
            for r in f.rows:
                mine = [t for t in transfers if t.product == r.product]
                r.transfer_out = sum(t.vials for t in mine if t.from_facility == f.facility)
                r.transfer_in = sum(t.vials for t in mine if t.to_facility == f.facility)
                if r.transfer_in or r.transfer_out:
                    r.after = plan_stock(after[(f.facility, r.product)], r.forecast.daily, start=start,
                                         upper_vials=r.forecast.upper_vials, lead_time_days=f.lead_time_days)
    return SupplyReport(now, start, weeks, percentile, transfer_days, facilities, transfers)
