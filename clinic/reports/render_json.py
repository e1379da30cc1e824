"""Our own JSON shape of the monthly report (format "rhledger-coverage", version 1).

Per facility and for the district, each indicator's ``numerator``, ``denominator`` and
``percentage`` (null when the denominator is 0, or for a count), the outcome counts behind
it, the definitions in words, anti-D use and stock. No names and no record identifiers:
the follow-up lists are a separate output.
"""
from __future__ import annotations

import json

from clinic.reports.coverage import (
    ATTRIBUTION,
    CAUTION,
    DISTRICT,
    INDICATORS,
    NULL_PERCENT,
    TIME_ZONE_NOTE,
    MonthReport,
)
from clinic.reports.month import Month

FORMAT = "rhledger-coverage"
VERSION = 1


def _block(rep: MonthReport, fac: str) -> dict:
    out = {}
    for ind in INDICATORS:
        c = rep.cell(fac, ind.id)
        out[ind.id] = {"numerator": c.numerator, "denominator": c.denominator,
                       "percentage": c.percentage, "outcomes": dict(sorted(c.outcomes.items()))}
    return out


def coverage_dict(rep: MonthReport, trend: dict[Month, MonthReport] | None = None) -> dict:
    doc = {
        "format": FORMAT,
        "version": VERSION,
        "month": str(rep.month),
        "period": {"start": rep.month.first_day.isoformat(), "end": rep.month.last_day.isoformat(),
                   "time_zone": rep.tz},
        "generated_at": rep.generated_at.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "profile": rep.profile,
        "profiles": {f: rep.profiles.get(f, rep.profile) for f in rep.facilities},
        "caution": CAUTION,
        "notes": [NULL_PERCENT, ATTRIBUTION, TIME_ZONE_NOTE],
        "indicators": [{"id": i.id, "section": i.section, "title": i.title, "definition": i.definition,
                        "numerator": i.numerator, "denominator": i.denominator} for i in INDICATORS],
        "facilities": {f: {"name": rep.facility_name(f), "indicators": _block(rep, f)} for f in rep.facilities},
        "district": {"indicators": _block(rep, DISTRICT)},
        "anti_d_used": [{"facility": "district" if u.facility == DISTRICT else u.facility, "by": u.by,
                         "key": u.key, "doses": u.doses, "iu": u.iu, "ug": u.ug} for u in rep.usage],
        "stock": [{"facility": b.facility, "product": b.product, "vial_iu": b.vial_iu, "lot": b.lot,
                   "lot_expiry": b.lot_expiry, "vials": b.vials, "iu": b.iu,
                   "expires_within_60_days": b.expires_soon, "expired": b.expired} for b in rep.stock],
        "new_sensitisations": [{"facility": s.facility, "found_on": s.due.strftime("%Y-%m-%d") if s.due else None,
                                "titre": s.detail.get("titre"), "doses_before": s.detail.get("doses_before", []),
                                "prior_anti_d": s.detail.get("prior_anti_d", "")} for s in rep.sensitisations],
    }
    if trend:
        doc["trend"] = {str(m): {("district" if f == DISTRICT else f):
                                 {i.id: [r.cell(f, i.id).numerator, r.cell(f, i.id).denominator]
                                  for i in INDICATORS} for f in rep.columns}
                        for m, r in sorted(trend.items())}
    return doc


def coverage_json(rep: MonthReport, trend=None) -> str:
    return json.dumps(coverage_dict(rep, trend), indent=2, ensure_ascii=False) + "\n"
