"""Invented pregnancy histories for the card tests, built through the real validation layer.

No real person, facility or patient: names, places and lots are made up.
"""
from __future__ import annotations

import uuid
from datetime import datetime, timedelta, timezone

from clinic.records.validate import validate_record

NOW = datetime(2026, 11, 20, 12, 0, tzinfo=timezone.utc)
CLINIC = "DEMO-CLINIC-NORTH"
HOSPITAL = "DEMO-HOSPITAL"


def _rid(n: int) -> str:
    # Random-looking but reproducible UUIDs (version 4 layout), as the store would make.
    n128 = (0x5EED_0000_0000_4000_8000_0000_0000_0000 + n * 0x9E3779B97F4A7C15_1234567) % (1 << 128)
    return str(uuid.UUID(int=n128, version=4))


def _entered(rec: dict) -> str:
    """When the record was typed in: a while after what it records happened."""
    for k in ("given_at", "sampled_at", "occurred_at", "born_at", "measured_at"):
        if rec.get(k):
            t = datetime.fromisoformat(rec[k].replace("Z", "+00:00")) + timedelta(minutes=47)
            return t.strftime("%Y-%m-%dT%H:%M:%SZ")
    for k in ("tested_on", "sampled_on", "booked_on", "referred_on"):
        if rec.get(k):
            return rec[k] + "T11:05:00Z"
    return "2026-04-02T09:12:00Z"


def record(kind, n, fields, *, woman_id=None, pregnancy_id=None, facility=CLINIC,
           created_at=None, version=1):
    rec = validate_record(kind, fields, now=NOW)
    created_at = created_at or _entered(rec)
    rec.update({"id": _rid(n), "kind": kind, "facility": facility, "created_at": created_at,
                "created_by": "midwife.demo", "version": version, "schema": 1})
    if woman_id:
        rec["woman_id"] = woman_id
    if pregnancy_id:
        rec["pregnancy_id"] = pregnancy_id
    return rec


def full_history():
    """Booking, typing, partner, fetal RHD, four screens with titres, three doses, two events, birth."""
    w = record("woman", 1, {"name": "Mara Kellin-Ostrova", "birth_date": "1994-03-17", "village": "Upper Fennick",
                            "phone": "+000 555 0101", "register_no": "NC-2026-0417"})
    p = record("pregnancy", 2, {"booked_on": "2026-04-02", "lmp": "2026-02-09", "scan_on": "2026-04-09",
                                "scan_crl_mm": 52.4, "edd": "2026-11-16", "gravidity": 3, "parity": 1,
                                "prior_sensitising": "APH at 30 weeks in 2023", "prior_anti_d": "1500 IU 2023",
                                "transfusion_history": False, "status": "delivered", "multiple": 1},
               woman_id=w["id"], created_at="2026-04-09T12:00:00Z")
    P = dict(woman_id=w["id"], pregnancy_id=p["id"])
    lab = "Demo District Laboratory"
    e = [
        record("typing", 3, {"abo": "O", "rhd": "negative", "method": "column-agglutination",
                             "tested_on": "2026-04-02", "lab": lab}, **P),
        record("partner_typing", 4, {"abo": "A", "rhd": "positive", "rhd_zygosity": "heterozygous",
                                     "method": "tube", "tested_on": "2026-04-16", "paternity_certain": True}, **P),
        record("fetal_rhd", 5, {"result": "positive", "sampled_on": "2026-04-16", "ga_days": "9+3", "lab": lab}, **P),
    ]
    for i, (day, ga, titre, iu) in enumerate([("2026-04-02", "7+3", 4, 0.4), ("2026-06-04", "16+3", 8, 1.2),
                                              ("2026-07-30", "24+3", 16, 4.5), ("2026-09-10", "30+3", 32, 9.8)]):
        e.append(record("screen", 10 + i, {"sampled_at": f"{day}T08:30:00Z", "ga_days": ga, "result": "positive",
                                          "antibodies": ["anti-D"], "titre": titre, "titre_antibody": "anti-D",
                                          "anti_d_iu_ml": iu, "anti_d_origin": "immune", "lab": lab}, **P))
    ev1 = record("event", 20, {"event_kind": "antepartum-haemorrhage", "occurred_at": "2026-06-20T22:15:00Z",
                               "ga_days": "18+5", "ongoing": False, "notes": "small bleed after a fall"}, **P)
    ev2 = record("event", 21, {"event_kind": "abdominal-trauma", "occurred_at": "2026-08-14T07:40:00Z",
                               "ga_days": "26+4", "notes": "road accident, seat belt"}, **P)
    e += [ev1, ev2]
    for i, (at, amt, unit, ind, cov) in enumerate([
            ("2026-06-21T10:00:00Z", 500, "IU", "sensitising-event", ev1["id"]),
            ("2026-08-14T12:30:00Z", 250, "ug", "sensitising-event", ev2["id"]),
            ("2026-08-20T09:00:00Z", 1500, "IU", "routine-antenatal", None)]):
        f = {"given_at": at, "amount": amt, "unit": unit, "route": "IM", "product": "Demo anti-D 1500",
             "lot": f"LOT-DX{4410 + i}", "lot_expiry": "2027-05-31", "indication": ind, "given_by": "N. Oduya"}
        if cov:
            f["covers_id"] = cov
        e.append(record("dose", 30 + i, f, **P))
    e.append(record("birth", 40, {"born_at": "2026-11-14T03:20:00Z", "ga_days": "39+5", "outcome": "live-birth",
                                  "baby_abo": "A", "baby_rhd": "positive", "dat": "positive",
                                  "cord_sampled": True}, **P))
    return w, p, e


def small_history():
    """A booking with a typing and one negative screen."""
    w = record("woman", 101, {"name": "Ilse Varnow", "stated_age": 27, "register_no": "NC-2026-0999"})
    p = record("pregnancy", 102, {"booked_on": "2026-09-01", "lmp": "2026-06-20", "status": "ongoing"},
               woman_id=w["id"])
    P = dict(woman_id=w["id"], pregnancy_id=p["id"])
    e = [record("typing", 103, {"abo": "A", "rhd": "weak-d", "weak_d_type": "4.0", "tested_on": "2026-09-01"}, **P),
         record("screen", 104, {"sampled_at": "2026-09-01T10:00:00Z", "result": "negative"}, **P)]
    return w, p, e


def put_in_store(store, history, facility=CLINIC, by="midwife.demo"):
    """Create the records of a history in a Store, keeping their ids and creation times."""
    from clinic.records.schema import KINDS
    w, p, e = history
    ids = {}
    for rec in [w, p, *e]:
        fields = {k: v for k, v in rec.items() if k in KINDS[rec["kind"]].field_names}
        now = datetime.fromisoformat(rec["created_at"].replace("Z", "+00:00"))
        ids[rec["id"]] = store.create(rec["kind"], fields, by=by, facility=facility, record_id=rec["id"],
                                      woman_id=rec.get("woman_id"), pregnancy_id=rec.get("pregnancy_id"),
                                      now=now).record
    return ids
