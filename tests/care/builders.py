"""Build stored-shape records for the care tests: fields validated by the one validation
layer (clinic.records.validate), plus the envelope the store adds. Every person is invented.

The standard pregnancy has LMP 2026-03-01, so EDD 2026-12-06 (LMP + 280 days), 12+0 is
2026-05-24, 20+0 is 2026-07-19, 28+0 is 2026-09-13 and 34+0 is 2026-10-25.
"""
from __future__ import annotations

import itertools
from datetime import datetime, timezone

from clinic.care import CareContext, Product, load_profile, plan_pregnancy
from clinic.records.validate import validate_record

NOW = datetime(2026, 12, 1, 12, 0, tzinfo=timezone.utc)
# Validation refuses dates after "now"; the builders validate against a far date so a test
# can record anything and then plan as of any moment it likes.
_VALIDATE_AT = datetime(2030, 1, 1, tzinfo=timezone.utc)
_ids = itertools.count(1)

P1500 = Product("Anti-D 1500 IU (300 µg)", 1500, ("IM", "IV"))
P250 = Product("Anti-D 250 IU (50 µg)", 250, ("IM",))


def utc(y, m, d, hh=0, mm=0) -> datetime:
    return datetime(y, m, d, hh, mm, tzinfo=timezone.utc)


def rec(record_kind: str, /, *, id: str | None = None, tz=timezone.utc, **fields) -> dict:
    f = validate_record(record_kind, fields, now=_VALIDATE_AT, tz=tz)
    rid = id or f"{record_kind}-{next(_ids):04d}"
    out = {"id": rid, "kind": record_kind, "facility": "test-clinic", "woman_id": "w1", "pregnancy_id": "p1",
           "created_at": "2026-01-01T00:00:00Z", "created_by": "test", "version": 1, "schema": 1}
    out.update(f)
    return out


def woman() -> dict:
    return {"id": "w1", "kind": "woman", "name": "Test Woman A", "stated_age": 28}


def pregnancy(**fields) -> dict:
    fields.setdefault("booked_on", "2026-05-01")
    fields.setdefault("status", "ongoing")
    if not any(k in fields for k in ("lmp", "edd", "scan_crl_mm", "scan_ga_days")):
        fields["lmp"] = "2026-03-01"
    f = validate_record("pregnancy", fields, now=_VALIDATE_AT)
    return {"id": "p1", "kind": "pregnancy", "woman_id": "w1", **f}


def typing(rhd="negative", tested_on="2026-05-01", **kw) -> dict:
    return rec("typing", abo="O", rhd=rhd, tested_on=tested_on, **kw)


def screen(sampled_at, result="negative", **kw) -> dict:
    return rec("screen", sampled_at=sampled_at, result=result, **kw)


def event(occurred_at, event_kind="antepartum-haemorrhage", **kw) -> dict:
    return rec("event", event_kind=event_kind, occurred_at=occurred_at, **kw)


def dose(given_at, amount, unit="IU", indication="routine-antenatal", lot="L1", lot_expiry="2027-12-31",
         route="IM", **kw) -> dict:
    return rec("dose", given_at=given_at, amount=amount, unit=unit, route=route, lot=lot, lot_expiry=lot_expiry,
               indication=indication, given_by="Midwife B", **kw)


def birth(born_at, baby_rhd="positive", outcome="live-birth", dat="negative", **kw) -> dict:
    return rec("birth", born_at=born_at, baby_rhd=baby_rhd, outcome=outcome, dat=dat, **kw)


def booked_negative() -> list[dict]:
    """RhD-negative booking: typing and a negative antibody screen on 2026-05-01 (8+5)."""
    return [typing("negative"), screen("2026-05-01T09:00:00Z")]


def make_plan(entries, *, now=NOW, profile="bsh-2014", overrides=None, tz=timezone.utc, products=(),
              freq=0.15, preg=None):
    prof = load_profile(profile, overrides=overrides or {})
    ctx = CareContext(rhd_negative_frequency=freq, maternal_blood_volume_ml=5000.0, products=tuple(products), tz=tz)
    return plan_pregnancy(woman(), preg or pregnancy(), entries, now=now, profile=prof, context=ctx)


def item(plan, code_prefix):
    found = [i for i in plan.items if i.code == code_prefix or i.code.startswith(code_prefix + ":")]
    assert found, f"no item {code_prefix}; items: {[i.code for i in plan.items]}"
    return found[0]


def alert_codes(plan) -> list[str]:
    return [a.code for a in plan.alerts]
