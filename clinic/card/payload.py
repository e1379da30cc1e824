"""The signed content of a card, version 1: a pregnancy history as compact CBOR (RFC 8949).

See docs/card-format.md for the full description. In short, the payload is the CBOR map::

    {"v": 1,
     "i": [issuer facility ID, issue number, issued at (Unix seconds)],
     "n": [issuer name, issuer phone],
     "f": [facility IDs referenced by records; index 0 is the issuer],
     "w": record, "p": record,
     "e": [record, ...],            # oldest first
     "t": omitted count}            # only when older entries had to be left out

and every record is the array ``[kind, id, fields, meta]``:

- ``kind``: index into ``KIND_CODES`` (woman and pregnancy have their own codes too);
- ``id``: the record's UUID as 16 bytes (text when it is not a UUID);
- ``fields``: map from the field's index in ``CARD_FIELDS[kind]`` to its value; dates are
  day numbers (days since 1970-01-01), date-times Unix seconds (UTC), choices the index in
  ``CHOICES`` (text for a value added to the schema later), a ``ref`` to another record of
  this card its position in ``e`` (an int) and otherwise its UUID;
- ``meta``: map with ``"f"`` facility index (omitted for 0), ``"v"`` version (omitted for
  1), ``"c"`` created at (Unix seconds), ``"a"`` amended at, ``"x"`` voided reason (present
  only for a voided record).

The tables below are frozen for version 1: add new fields and choices only at the end.
"""
from __future__ import annotations

import math
import uuid
from dataclasses import dataclass
from datetime import date, datetime, timedelta, timezone
from decimal import Decimal
from typing import Any

import cbor2

from clinic.records.schema import KINDS

PAYLOAD_VERSION = 1
EPOCH = date(1970, 1, 1)

# Record kinds, in code order (frozen).
KIND_CODES = ("woman", "pregnancy", "typing", "partner_typing", "fetal_rhd", "screen", "event", "fmh",
              "dose", "doppler", "fbs", "iut", "birth", "referral")

# Fields each record carries, in key order (frozen). Fields of the schema not listed here are
# in OMITTED_FIELDS with the reason; a test keeps the two in step with the schema.
CARD_FIELDS: dict[str, tuple[str, ...]] = {
    "woman": ("name", "birth_date", "stated_age", "village", "phone", "register_no"),
    "pregnancy": ("booked_on", "lmp", "scan_on", "scan_crl_mm", "scan_ga_days", "edd", "gravidity", "parity",
                  "prior_sensitising", "prior_anti_d", "transfusion_history", "status", "multiple"),
    "typing": ("abo", "rhd", "weak_d_type", "partial_d_category", "method", "tested_on", "lab"),
    "partner_typing": ("abo", "rhd", "rhd_zygosity", "method", "tested_on", "paternity_certain"),
    "fetal_rhd": ("result", "sampled_on", "ga_days", "lab"),
    "screen": ("sampled_at", "ga_days", "result", "antibodies", "antibody_other", "titre", "titre_antibody",
               "anti_d_iu_ml", "anti_d_origin", "lab"),
    "event": ("event_kind", "occurred_at", "ga_days", "ongoing", "notes", "bleeding_heavy", "bleeding_repeated",
              "abdominal_pain"),
    "fmh": ("method", "sampled_at", "rosette_result", "fetal_cells", "cells_counted", "fetal_cell_percent",
            "maternal_volume_ml", "covers_id"),
    "dose": ("given_at", "amount", "unit", "route", "product", "lot", "lot_expiry", "indication", "given_by",
             "covers_id"),
    "doppler": ("measured_at", "ga_days", "mca_psv_cm_s"),
    "fbs": ("sampled_at", "ga_days", "hb_g_dl", "hct_pct"),
    "iut": ("given_at", "ga_days", "volume_ml", "donor_hct_pct", "pre_hct_pct", "post_hct_pct"),
    "birth": ("born_at", "ga_days", "outcome", "baby_abo", "baby_rhd", "dat", "cord_sampled"),
    "referral": ("referred_on", "to_facility", "reason", "question"),
}
OMITTED_FIELDS = {
    ("woman", "address"): "directions to her home are not needed elsewhere and are long",
    ("dose", "override_reason"): "the clinician's reason stays in the facility's record; the card carries the dose",
}

# Choice values in code order (frozen; a value not listed travels as text).
CHOICES: dict[str, tuple[str, ...]] = {
    "abo": ("A", "B", "AB", "O", "unknown"),
    "rhd": ("positive", "negative", "weak-d", "partial-d", "inconclusive", "unknown"),
    "zygosity": ("homozygous", "heterozygous", "unknown"),
    "method": ("tube", "column-agglutination", "tile-or-slide", "microplate", "molecular", "other",
               "rosette", "kleihauer-betke", "flow-cytometry"),
    "result": ("negative", "positive", "inconclusive"),
    "antibody": ("anti-D", "anti-C", "anti-c", "anti-E", "anti-e", "anti-K", "anti-Fya", "other"),
    "origin": ("passive", "immune", "undetermined"),
    "event": ("miscarriage", "termination", "ectopic", "molar-pregnancy", "antepartum-haemorrhage",
              "abdominal-trauma", "external-cephalic-version", "amniocentesis", "chorionic-villus-sampling",
              "fetal-blood-sampling", "intrauterine-death", "other", "threatened-miscarriage"),
    "unit": ("ug", "IU"),
    "route": ("IM", "IV"),
    "indication": ("routine-antenatal", "sensitising-event", "postpartum", "large-fmh"),
    "status": ("ongoing", "delivered", "ended-early", "transferred", "lost-to-follow-up"),
    "outcome": ("live-birth", "stillbirth"),
    "baby_rhd": ("positive", "negative", "not-tested"),
    "dat": ("positive", "negative", "not-done"),
}
# Which table each choice field uses.
CHOICE_TABLE = {
    ("typing", "abo"): "abo", ("partner_typing", "abo"): "abo", ("birth", "baby_abo"): "abo",
    ("typing", "rhd"): "rhd", ("partner_typing", "rhd"): "rhd",
    ("partner_typing", "rhd_zygosity"): "zygosity",
    ("typing", "method"): "method", ("partner_typing", "method"): "method", ("fmh", "method"): "method",
    ("fetal_rhd", "result"): "result", ("screen", "result"): "result", ("fmh", "rosette_result"): "result",
    ("screen", "antibodies"): "antibody", ("screen", "titre_antibody"): "antibody",
    ("screen", "anti_d_origin"): "origin",
    ("event", "event_kind"): "event",
    ("dose", "unit"): "unit", ("dose", "route"): "route", ("dose", "indication"): "indication",
    ("pregnancy", "status"): "status",
    ("birth", "outcome"): "outcome", ("birth", "baby_rhd"): "baby_rhd", ("birth", "dat"): "dat",
}
# The field that dates an entry, for ordering and for leaving out the oldest.
WHEN_FIELD = {
    "typing": "tested_on", "partner_typing": "tested_on", "fetal_rhd": "sampled_on", "screen": "sampled_at",
    "event": "occurred_at", "fmh": "sampled_at", "dose": "given_at", "doppler": "measured_at",
    "fbs": "sampled_at", "iut": "given_at", "birth": "born_at", "referral": "referred_on",
}
# Kept even when older entries must be left out: the latest of each of these kinds.
ALWAYS_KEEP = ("typing", "partner_typing", "fetal_rhd")


class PayloadError(ValueError):
    """Card content that does not follow the version 1 layout; the message says where."""


# ---- value conversions ---------------------------------------------------------------

def day_number(iso: str) -> int:
    return (date.fromisoformat(iso[:10]) - EPOCH).days


def from_day_number(n: int) -> str:
    return (EPOCH + timedelta(days=n)).isoformat()


def unix_seconds(text: str) -> int:
    dt = datetime.fromisoformat(text.replace("Z", "+00:00"))
    if dt.tzinfo is None:
        raise PayloadError(f"date-time {text!r} has no time zone")
    return int(dt.timestamp())


def from_unix(n: int) -> str:
    return datetime.fromtimestamp(n, tz=timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def _id_out(v: str):
    try:
        u = uuid.UUID(str(v))
        if str(u) == str(v).lower():
            return u.bytes
    except ValueError:
        pass
    return str(v)


def _id_in(v) -> str:
    if isinstance(v, bytes):
        if len(v) != 16:
            raise PayloadError("a record id is not 16 bytes")
        return str(uuid.UUID(bytes=v))
    if isinstance(v, str) and v:
        return v
    raise PayloadError("a record id is missing")


def _field_spec(kind: str, name: str):
    return KINDS[kind].field(name)


def _value_out(kind: str, name: str, v: Any, id_index: dict[str, int]):
    f = _field_spec(kind, name)
    t = f.type
    if t == "date":
        return day_number(v)
    if t == "datetime":
        return unix_seconds(v)
    if t == "choice":
        table = CHOICE_TABLE.get((kind, name))
        if table is None:
            return v  # int choices (titre) travel as the number
        vals = CHOICES[table]
        return vals.index(v) if v in vals else str(v)
    if t == "choices":
        vals = CHOICES[CHOICE_TABLE[(kind, name)]]
        return [vals.index(x) if x in vals else str(x) for x in v]
    if t == "ref":
        return id_index[v] if v in id_index else _id_out(v)
    if t == "float":
        x = float(v)
        if x.is_integer() and abs(x) < 2 ** 31:
            return int(x)
        d = Decimal(repr(x))
        # A decimal fraction (tag 4) is shorter than a float64 for values such as 0.4.
        return d if float(d) == x and -d.as_tuple().exponent <= 6 else x
    return v


def _value_in(kind: str, name: str, v: Any, ids: list[str]):
    f = _field_spec(kind, name)
    t = f.type
    if t == "date":
        if not isinstance(v, int) or isinstance(v, bool) or not -25000 < v < 100000:
            raise PayloadError(f"{kind}.{name} is not a day number")
        return from_day_number(v)
    if t == "datetime":
        if not isinstance(v, int) or isinstance(v, bool) or not -2208988800 < v < 7258118400:
            raise PayloadError(f"{kind}.{name} is not a time")
        return from_unix(v)
    if t == "choice":
        table = CHOICE_TABLE.get((kind, name))
        if table is None:
            return v
        return _choice_in(table, v, kind, name)
    if t == "choices":
        if not isinstance(v, (list, tuple)):
            raise PayloadError(f"{kind}.{name} is not a list")
        return [_choice_in(CHOICE_TABLE[(kind, name)], x, kind, name) for x in v]
    if t == "ref":
        if isinstance(v, int) and not isinstance(v, bool):
            if not 0 <= v < len(ids):
                raise PayloadError(f"{kind}.{name} refers to entry {v}, which the card does not hold")
            return ids[v]
        return _id_in(v)
    if t == "float":
        if isinstance(v, bool) or not isinstance(v, (int, float, Decimal)):
            raise PayloadError(f"{kind}.{name} is not a number")
        x = float(v)
        if not math.isfinite(x):
            raise PayloadError(f"{kind}.{name} is not a finite number")
        return x
    if t in ("int", "ga"):
        if isinstance(v, bool) or not isinstance(v, int):
            raise PayloadError(f"{kind}.{name} is not a whole number")
        return v
    if t == "bool":
        if not isinstance(v, bool):
            raise PayloadError(f"{kind}.{name} is not yes/no")
        return v
    if not isinstance(v, str):
        raise PayloadError(f"{kind}.{name} is not text")
    return v


def _choice_in(table: str, v, kind: str, name: str) -> str:
    vals = CHOICES[table]
    if isinstance(v, int) and not isinstance(v, bool):
        if not 0 <= v < len(vals):
            raise PayloadError(f"{kind}.{name}: choice code {v} is unknown")
        return vals[v]
    if isinstance(v, str):
        return v
    raise PayloadError(f"{kind}.{name} is not a choice")


# ---- records -------------------------------------------------------------------------

def entry_when(rec: dict) -> str:
    """Sort key of an entry: its dating field as UTC text, else created_at."""
    f = WHEN_FIELD.get(rec.get("kind"))
    v = rec.get(f) if f else None
    if v and len(v) == 10:
        v = v + "T00:00:00Z"
    return v or rec.get("created_at") or ""


def _when_seconds(rec: dict) -> int | None:
    f = WHEN_FIELD.get(rec.get("kind"))
    v = rec.get(f) if f else None
    if not v:
        return None
    return day_number(v) * 86400 if len(v) == 10 else unix_seconds(v)


def _record_out(rec: dict, facilities: list[str], id_index: dict[str, int]) -> list:
    kind = rec["kind"]
    if kind not in CARD_FIELDS:
        raise PayloadError(f"record kind {kind!r} cannot go on a card")
    fields = {}
    for i, name in enumerate(CARD_FIELDS[kind]):
        v = rec.get(name)
        if v is None or v == "" or v == []:
            continue
        fields[i] = _value_out(kind, name, v, id_index)
    meta = {}
    fac = rec.get("facility")
    if fac:
        if fac not in facilities:
            facilities.append(fac)
        if facilities.index(fac):
            meta["f"] = facilities.index(fac)
    if rec.get("version", 1) not in (None, 1):
        meta["v"] = int(rec["version"])
    created = unix_seconds(rec["created_at"]) if rec.get("created_at") else None
    when = _when_seconds(rec)
    if created is not None:
        # Relative to the entry's own date when it has one: a few bytes instead of five.
        if when is not None:
            meta["d"] = created - when
        else:
            meta["c"] = created
    if rec.get("amended_at"):
        meta["a"] = unix_seconds(rec["amended_at"]) - (created or 0)
    if rec.get("voided"):
        meta["x"] = str(rec.get("voided_reason") or "")
    return [KIND_CODES.index(kind), _id_out(rec["id"]), fields, meta]


@dataclass
class CardContent:
    """What a card holds, as stored-shape records, plus the issue facts."""

    woman: dict
    pregnancy: dict
    entries: list[dict]
    issuer_id: str
    issuer_name: str
    issuer_phone: str
    issue: int
    issued_at: str  # UTC text
    omitted: int = 0  # older entries left out for size

    def to_dict(self) -> dict:
        return {"woman": self.woman, "pregnancy": self.pregnancy, "entries": self.entries,
                "issuer": {"facility_id": self.issuer_id, "name": self.issuer_name, "phone": self.issuer_phone},
                "issue": self.issue, "issued_at": self.issued_at, "omitted_entries": self.omitted}


def order_entries(entries: list[dict]) -> list[dict]:
    return sorted(entries, key=lambda r: (entry_when(r), r.get("created_at") or "", r["id"]))


def encode_content(c: CardContent) -> bytes:
    """The CBOR payload of a card (deterministic encoding, RFC 8949 section 4.2)."""
    facilities = [c.issuer_id]
    ents = order_entries(c.entries)
    id_index = {r["id"]: i for i, r in enumerate(ents)}
    doc = {
        "v": PAYLOAD_VERSION,
        "i": [c.issuer_id, int(c.issue), unix_seconds(c.issued_at)],
        "n": [c.issuer_name or "", c.issuer_phone or ""],
        "w": _record_out(c.woman, facilities, {}),
        "p": _record_out(c.pregnancy, facilities, {}),
        "e": [_record_out(r, facilities, id_index) for r in ents],
    }
    if c.omitted:
        doc["t"] = int(c.omitted)
    doc["f"] = facilities
    return cbor2.dumps(doc, canonical=True)


def _record_in(arr, expect: tuple[str, ...] | None, facilities: list[str], ids: list[str], where: str) -> dict:
    if not isinstance(arr, (list, tuple)) or len(arr) != 4:
        raise PayloadError(f"{where} is not a record")
    code, rid, fields, meta = arr
    if not isinstance(code, int) or isinstance(code, bool) or not 0 <= code < len(KIND_CODES):
        raise PayloadError(f"{where} has an unknown kind code {code!r}")
    kind = KIND_CODES[code]
    if expect is not None and kind not in expect:
        raise PayloadError(f"{where} is a {kind}, expected {' or '.join(expect)}")
    if expect is None and kind in ("woman", "pregnancy"):
        raise PayloadError(f"{where} is a {kind} among the entries")
    if not isinstance(fields, dict) or not isinstance(meta, dict):
        raise PayloadError(f"{where} is malformed")
    names = CARD_FIELDS[kind]
    rec: dict[str, Any] = {"id": _id_in(rid), "kind": kind}
    for k, v in fields.items():
        if not isinstance(k, int) or isinstance(k, bool) or not 0 <= k < len(names):
            raise PayloadError(f"{where} ({kind}) has an unknown field {k!r}")
        rec[names[k]] = _value_in(kind, names[k], v, ids)
    fi = meta.get("f", 0)
    if not isinstance(fi, int) or isinstance(fi, bool) or not 0 <= fi < len(facilities):
        raise PayloadError(f"{where} names an unknown facility")
    rec["facility"] = facilities[fi]
    ver = meta.get("v", 1)
    if not isinstance(ver, int) or isinstance(ver, bool) or ver < 1:
        raise PayloadError(f"{where} has a bad version")
    rec["version"] = ver
    created = None
    if "c" in meta or "d" in meta:
        when = _when_seconds(rec)
        if "d" in meta and when is None:
            raise PayloadError(f"{where} gives its creation time relative to a date it lacks")
        created = meta["c"] if "c" in meta else meta["d"]
        if not isinstance(created, int) or isinstance(created, bool):
            raise PayloadError(f"{where} has a bad creation time")
        created += 0 if "c" in meta else when
        if not 0 < created < 7258118400:
            raise PayloadError(f"{where} has a bad creation time")
        rec["created_at"] = from_unix(created)
    if "a" in meta:
        a = meta["a"]
        if not isinstance(a, int) or isinstance(a, bool) or created is None or not 0 <= a < 7258118400:
            raise PayloadError(f"{where} has a bad amendment time")
        rec["amended_at"] = from_unix(created + a)
    if "x" in meta:
        if not isinstance(meta["x"], str):
            raise PayloadError(f"{where} has a bad voided reason")
        rec["voided"] = True
        rec["voided_reason"] = meta["x"]
    return rec


def decode_content(payload: bytes) -> CardContent:
    """Card content from the CBOR payload; PayloadError names what is wrong."""
    try:
        doc = cbor2.loads(payload)
    except Exception as e:  # noqa: BLE001 - cbor2 raises several types on bad input
        raise PayloadError(f"the content is not CBOR ({type(e).__name__})") from None
    try:
        return _decode_doc(doc)
    except PayloadError:
        raise
    except (KeyError, TypeError, ValueError, IndexError, OverflowError, AttributeError) as e:
        raise PayloadError(f"the content does not follow the card layout ({type(e).__name__}: {e})") from None


def _decode_doc(doc) -> CardContent:
    if isinstance(doc, cbor2.frozendict):
        doc = dict(doc)
    if not isinstance(doc, dict):
        raise PayloadError("the content is not a card (no map)")
    if doc.get("v") != PAYLOAD_VERSION:
        raise PayloadError(f"content version {doc.get('v')!r}; this installation reads version {PAYLOAD_VERSION}")
    for k in ("i", "n", "f", "w", "p", "e"):
        if k not in doc:
            raise PayloadError(f"the content lacks part {k!r}")
    issuer_id, issue, issued = doc["i"]
    name, phone = doc["n"]
    facilities = doc["f"]
    if not (isinstance(issuer_id, str) and isinstance(issue, int) and not isinstance(issue, bool) and issue >= 1
            and isinstance(issued, int) and not isinstance(issued, bool) and 0 < issued < 7258118400):
        raise PayloadError("the issue facts are malformed")
    if not isinstance(name, str) or not isinstance(phone, str):
        raise PayloadError("the issuer's name or phone is malformed")
    if (not isinstance(facilities, (list, tuple)) or not facilities or facilities[0] != issuer_id
            or not all(isinstance(f, str) and f for f in facilities)):
        raise PayloadError("the facility table is malformed")
    facilities = list(facilities)
    raw_entries = doc["e"]
    if not isinstance(raw_entries, (list, tuple)):
        raise PayloadError("the entries are not a list")
    ids = []
    for i, arr in enumerate(raw_entries):
        if not isinstance(arr, (list, tuple)) or len(arr) != 4:
            raise PayloadError(f"entry {i + 1} is not a record")
        ids.append(_id_in(arr[1]))
    woman = _record_in(doc["w"], ("woman",), facilities, [], "the woman's record")
    preg = _record_in(doc["p"], ("pregnancy",), facilities, [], "the pregnancy record")
    preg["woman_id"] = woman["id"]
    entries = []
    for i, arr in enumerate(raw_entries):
        r = _record_in(arr, None, facilities, ids, f"entry {i + 1}")
        r["woman_id"] = woman["id"]
        r["pregnancy_id"] = preg["id"]
        entries.append(r)
    if len(set(ids)) != len(ids):
        raise PayloadError("two entries share one id")
    omitted = doc.get("t", 0)
    if not isinstance(omitted, int) or isinstance(omitted, bool) or omitted < 0:
        raise PayloadError("the omitted-entries count is malformed")
    return CardContent(woman, preg, entries, issuer_id, name, phone, issue, from_unix(issued), omitted)


def peek_issue(payload: bytes) -> tuple[str, int, str] | None:
    """(issuer, issue, issued_at) of a payload without full checks, or None when unreadable."""
    try:
        doc = cbor2.loads(payload)
        issuer_id, issue, issued = doc["i"]
        return str(issuer_id), int(issue), from_unix(int(issued))
    except Exception:  # noqa: BLE001 - any failure just means "not peekable"
        return None
