"""The supply report as JSON (docs/supply-forecast.md) and as one tidy CSV."""
from __future__ import annotations

import csv
import io
import json
from datetime import date, timedelta
from typing import Any

from clinic.records.csv_cells import LINE_END, safe_dict
from clinic.supply.report import ProductRow, SupplyReport
from clinic.supply.stock_plan import StockPlan

FORMAT = "rhledger-supply-forecast"
VERSION = 1
CSV_COLUMNS = ("record", "facility", "facility_name", "product", "vial_iu", "week", "week_start",
               "expected_vials", "upper_vials", "on_hand_vials", "expiring_unused_vials", "stockout_date",
               "order_vials", "order_by", "lot", "expiry", "vials", "from", "to", "arrives")


def _d(v: date | None) -> str | None:
    return None if v is None else v.isoformat()


def _r(x: float) -> float:
    return round(float(x) + 0.0, 2)


def _stock(sp: StockPlan) -> dict[str, Any]:
    return {"on_hand_vials": sp.on_hand_vials, "expiring_unused_vials": sp.expiring_unused_vials,
            "stockout_date": _d(sp.stockout_date), "order_vials": sp.order_vials, "order_by": _d(sp.order_by),
            "order_urgent": sp.order_urgent}


def _row(r: ProductRow) -> dict[str, Any]:
    fc, sp = r.forecast, r.stock
    return {
        "product": fc.product.name, "vial_iu": fc.product.vial_iu,
        "expected_vials": _r(fc.expected_vials), "upper_vials": fc.upper_vials, "known_vials": fc.known_vials,
        **_stock(sp),
        "expired_on_hand_vials": sp.expired_vials,
        "births_expected": _r(fc.births_expected), "events_expected": _r(fc.events_expected),
        "transfer_in_vials": r.transfer_in, "transfer_out_vials": r.transfer_out,
        "after_transfers": None if r.after is None else _stock(r.after),
        "weeks": [{"week": w.week, "start": w.start.isoformat(), "routine_vials": _r(w.routine_vials),
                   "postpartum_vials": _r(w.postpartum_vials), "event_vials": _r(w.event_vials),
                   "expected_vials": _r(w.expected_vials), "upper_vials": w.upper_vials} for w in fc.weeks],
        "lots": [{"lot": o.lot, "expiry": o.expiry.isoformat(), "vials": o.vials, "expected_use_vials": _r(o.used),
                  "expiring_unused_vials": o.expiring_unused} for o in sp.lots],
    }


def to_dict(rep: SupplyReport) -> dict[str, Any]:
    return {
        "format": FORMAT, "version": VERSION,
        "made_at": rep.made_at.strftime("%Y-%m-%dT%H:%M:%SZ"), "start": rep.start.isoformat(),
        "end": (rep.start + timedelta(days=rep.weeks * 7 - 1)).isoformat(), "weeks": rep.weeks,
        "percentile": rep.percentile, "transfer_days": rep.transfer_days,
        "caution": rep.caution, "method": rep.method,
        "facilities": [{
            "facility": f.facility, "name": f.name, "planned_with": f.planned_with,
            "lead_time_days": f.lead_time_days,
            "events_12_months": f.rate.count, "event_rate_per_week": round(f.rate.per_week, 3),
            "expected_doses": _r(f.expected_doses), "upper_doses": f.upper_doses, "known_doses": f.known_doses,
            "notes": list(f.notes),
            "products": [_row(r) for r in f.rows],
        } for f in rep.facilities],
        "transfers": [{
            "from": t.from_facility, "from_name": rep.name_of(t.from_facility),
            "to": t.to_facility, "to_name": rep.name_of(t.to_facility),
            "product": t.product.name, "vial_iu": t.product.vial_iu, "lot": t.lot, "vials": t.vials,
            "expiry": t.expiry.isoformat(), "arrives": t.arrives.isoformat(),
            "to_stockout_date": _d(t.to_stockout_date),
        } for t in rep.transfers],
    }


def json_text(rep: SupplyReport) -> str:
    return json.dumps(to_dict(rep), indent=2, ensure_ascii=False) + "\n"


def csv_text(rep: SupplyReport) -> str:
    """One row per facility and product ("product"), per week ("week"), and per transfer ("transfer")."""
    buf = io.StringIO()
    # Lot numbers and names are typed at clinics: no cell may be a spreadsheet formula.
    w = csv.DictWriter(buf, fieldnames=CSV_COLUMNS, lineterminator=LINE_END)
    w.writeheader()
    doc = to_dict(rep)
    for f in doc["facilities"]:
        base = {"facility": f["facility"], "facility_name": f["name"]}
        for p in f["products"]:
            prod = {**base, "product": p["product"], "vial_iu": p["vial_iu"]}
            w.writerow(safe_dict({"record": "product", **prod, **{k: p[k] for k in (
                "expected_vials", "upper_vials", "on_hand_vials", "expiring_unused_vials", "stockout_date",
                "order_vials", "order_by")}}))
            for wk in p["weeks"]:
                w.writerow(safe_dict({"record": "week", **prod, "week": wk["week"], "week_start": wk["start"],
                                      "expected_vials": wk["expected_vials"], "upper_vials": wk["upper_vials"]}))
    for t in doc["transfers"]:
        w.writerow(safe_dict({"record": "transfer", "facility": t["from"], "facility_name": t["from_name"],
                              "product": t["product"], "vial_iu": t["vial_iu"], "lot": t["lot"], "expiry": t["expiry"],
                              "vials": t["vials"], "from": t["from"], "to": t["to"], "arrives": t["arrives"]}))
    return buf.getvalue()
