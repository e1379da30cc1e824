"""The district trust list: which facility keys this installation believes, and for which dates.

The district signs a list of facilities (ID, name, kind, phone) and their public keys, each
with a validity period, and sends the file (``trust.cose``) to every installation, which
imports it. A card or bundle is *trusted* when its COSE kid names a key of the list that
verifies the signature and was valid on the card's issue date.

File format: a COSE_Sign1 message (see ``clinic.signing.cose``) signed by the district's
own facility key, whose payload is the CBOR map::

    {"fmt": "rhledger-trust", "v": 1, "district": "<id>", "name": "<district name>",
     "seq": <int, grows with every list>, "issued": <day number>,
     "facilities": [{"id": ..., "name": ..., "kind": "clinic"|"hospital"|"district",
                     "phone": ..., "keys": [{"k": <32-byte raw Ed25519 key>,
                                            "from": <day number>|null, "to": <day number>|null}]}]}

Day numbers count days from 1970-01-01; ``from`` and ``to`` are inclusive.

Import rules (``import_trust_list``), stored under ``<data>/trust/``:

1. The list must verify under a key listed for its own district entry (kind ``district``).
2. First import (no ``district.json`` yet): the caller must give the signing key's
   fingerprint, confirmed with the district officer over a separate channel (phone, in
   person). A mismatch or no fingerprint refuses the import (``DistrictKeyUnconfirmed``
   carries the fingerprint to show). The key is then pinned in ``district.json``.
3. Later imports: signed by the pinned key, or by a key that the installed list names as a
   key of the same district (how the district rotates its own key); the pin follows it.
4. ``seq`` may not go down (an older list would bring back removed keys); the same ``seq``
   with different content is refused.

``load_trust`` re-verifies the stored list against the pin each time and always adds the
installation's own current and retired keys.

Checking a signed card or bundle against the list is ``TrustList.verify``: it finds the
signer's key by kid, checks the signature with ``clinic.signing.cose`` and the key's validity
on the given date, and says ``trusted``, ``unknown-issuer`` or ``altered``.
"""
from __future__ import annotations

import json
import time
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta, timezone
from pathlib import Path
from typing import Any, Iterable, Mapping

import cbor2

from clinic.signing import cose
from clinic.signing.errors import CoseFormatError, DistrictKeyUnconfirmed, KeyStoreError, TrustListError
from clinic.signing.files import atomic_write
from clinic.signing.keys import (
    KeyInfo,
    SigningKey,
    b64,
    current_key_info,
    fingerprint_of,
    kid_of,
    normalise_fingerprint,
    public_from_b64,
    retired_keys,
)

TRUST_DIR = "trust"
LIST_FILE = "trust-list.cose"
PIN_FILE = "district.json"
FORMAT_TAG = "rhledger-trust"
FORMAT_VERSION = 1
FACILITY_KINDS = ("clinic", "hospital", "district")
EPOCH = date(1970, 1, 1)
STATES = ("trusted", "unknown-issuer", "altered")


def _as_date(on_date) -> date:
    """A date, datetime, ISO text or None (today, UTC) as a date."""
    if on_date is None:
        return datetime.now(timezone.utc).date()
    if isinstance(on_date, datetime):
        return on_date.date()
    if isinstance(on_date, date):
        return on_date
    return date.fromisoformat(str(on_date))


def day_number(d: date) -> int:
    return (d - EPOCH).days


def from_day_number(n: int) -> date:
    return EPOCH + timedelta(days=int(n))


def _date_or_none(v, what: str) -> date | None:
    if v is None or v == "":
        return None
    if isinstance(v, date):
        return v
    try:
        return date.fromisoformat(str(v).strip())
    except ValueError:
        raise TrustListError(f"{what} {v!r} is not a date (YYYY-MM-DD)") from None


@dataclass(frozen=True)
class TrustKey:
    """One public key of a facility and the days it may sign (inclusive; None = open)."""

    public_raw: bytes
    valid_from: date | None = None
    valid_to: date | None = None

    @property
    def kid(self) -> bytes:
        return kid_of(self.public_raw)

    @property
    def key_b64(self) -> str:
        return b64(self.public_raw)

    @property
    def fingerprint(self) -> str:
        return fingerprint_of(self.public_raw)

    def valid_on(self, day: date) -> bool:
        return (self.valid_from is None or day >= self.valid_from) and \
               (self.valid_to is None or day <= self.valid_to)

    def validity_text(self) -> str:
        a = self.valid_from.isoformat() if self.valid_from else "any earlier date"
        b = self.valid_to.isoformat() if self.valid_to else "onwards"
        return f"from {a} to {b}" if self.valid_to else f"from {a} onwards"

    def to_dict(self) -> dict:
        return {"kid": self.kid.hex(), "key": self.key_b64, "fingerprint": self.fingerprint,
                "valid_from": self.valid_from.isoformat() if self.valid_from else None,
                "valid_to": self.valid_to.isoformat() if self.valid_to else None}


@dataclass(frozen=True)
class TrustEntry:
    """A facility of the trust list."""

    facility_id: str
    name: str
    kind: str = "clinic"
    phone: str = ""
    keys: tuple[TrustKey, ...] = ()
    own: bool = False  # this installation itself

    def to_dict(self) -> dict:
        return {"facility_id": self.facility_id, "name": self.name, "kind": self.kind,
                "phone": self.phone, "own": self.own, "keys": [k.to_dict() for k in self.keys]}


@dataclass(frozen=True)
class Verified:
    """What verification found. ``state`` is one of ``STATES``; ``reason`` says it in words."""

    payload: bytes
    state: str
    kid: bytes
    facility_id: str | None
    entry: TrustEntry | None = None  # the signer's entry when the kid is known
    reason: str = ""

    @property
    def trusted(self) -> bool:
        return self.state == "trusted"


@dataclass
class TrustList:
    """The facilities this installation trusts. Empty apart from itself until a list is imported."""

    entries: list[TrustEntry] = field(default_factory=list)
    district_id: str | None = None
    district_name: str | None = None
    seq: int | None = None
    issued: date | None = None

    def keys_with_kid(self, kid: bytes) -> list[tuple[TrustEntry, TrustKey]]:
        return [(e, k) for e in self.entries for k in e.keys if k.kid == bytes(kid)]

    def lookup(self, kid: bytes, on_date=None) -> TrustEntry | None:
        """The facility whose key ``kid`` is valid on ``on_date`` (default today), or None."""
        day = _as_date(on_date)
        for e, k in self.keys_with_kid(kid):
            if k.valid_on(day):
                return e
        return None

    def verify(self, message: bytes | cose.CoseSign1, on_date=None) -> Verified:
        """Check a COSE_Sign1 message against this list.

        ``trusted``: a key of the list valid on ``on_date`` (default today) signed it.
        ``altered``: the kid is known but no key with it verifies the signature: the bytes were
        changed or damaged after signing. ``unknown-issuer``: no key with that kid is trusted for
        that date, so the content cannot be checked. Raises CoseFormatError for non-COSE input.
        """
        msg = message if isinstance(message, cose.CoseSign1) else cose.parse1(message)
        day = _as_date(on_date)
        known = self.keys_with_kid(msg.kid)
        if not known:
            return Verified(msg.payload, "unknown-issuer", msg.kid, None,
                            reason="the signing key is not in this installation's trust list")
        for entry, key in known:
            if msg.signed_by(key.public_raw):
                if key.valid_on(day):
                    return Verified(msg.payload, "trusted", msg.kid, entry.facility_id, entry,
                                    reason=f"signed by {entry.name} ({entry.facility_id})")
                return Verified(msg.payload, "unknown-issuer", msg.kid, entry.facility_id, entry,
                                reason=(f"signed with a key of {entry.facility_id} that the trust list "
                                        f"accepts only {key.validity_text()}, not on {day.isoformat()}"))
        entry = known[0][0]
        return Verified(msg.payload, "altered", msg.kid, entry.facility_id, entry,
                        reason=f"the signature of {entry.facility_id} does not match the content")

    def entry(self, facility_id: str) -> TrustEntry | None:
        for e in self.entries:
            if e.facility_id == facility_id:
                return e
        return None

    def to_dict(self) -> dict:
        return {"district_id": self.district_id, "district_name": self.district_name, "seq": self.seq,
                "issued": self.issued.isoformat() if self.issued else None,
                "facilities": [e.to_dict() for e in self.entries]}


# ---- building (at the district) ----------------------------------------------------

def entry_from_mapping(raw: Mapping[str, Any], where: str = "entry") -> TrustEntry:
    """A TrustEntry from the facilities file shape (``rhledger keys show --json`` output fits)."""
    if not isinstance(raw, Mapping):
        raise TrustListError(f"{where} is not an object")
    fid = str(raw.get("facility_id") or raw.get("id") or "").strip()
    if not fid:
        raise TrustListError(f"{where} has no facility_id")
    kind = str(raw.get("kind") or "clinic")
    if kind not in FACILITY_KINDS:
        raise TrustListError(f"{where} ({fid}): kind {kind!r} is not one of {', '.join(FACILITY_KINDS)}")
    keys_raw = raw.get("keys")
    if keys_raw is None and raw.get("key"):
        keys_raw = [raw]  # one key given flat, as `keys show --json` prints it
    if not isinstance(keys_raw, list) or not keys_raw:
        raise TrustListError(f"{where} ({fid}) has no public keys")
    keys = []
    for i, k in enumerate(keys_raw):
        if not isinstance(k, Mapping):
            raise TrustListError(f"{where} ({fid}) key {i + 1} is not an object")
        try:
            raw_key = public_from_b64(k.get("key", ""))
        except KeyStoreError as e:
            raise TrustListError(f"{where} ({fid}) key {i + 1}: {e}") from None
        if k.get("kid") and str(k["kid"]).lower() != kid_of(raw_key).hex():
            raise TrustListError(f"{where} ({fid}) key {i + 1}: kid {k['kid']} does not match the key "
                                 f"(its kid is {kid_of(raw_key).hex()}); was the key mistyped?")
        vf = _date_or_none(k.get("valid_from"), f"{where} ({fid}) valid_from")
        vt = _date_or_none(k.get("valid_to"), f"{where} ({fid}) valid_to")
        if vf and vt and vt < vf:
            raise TrustListError(f"{where} ({fid}) key {i + 1}: valid_to {vt} is before valid_from {vf}")
        keys.append(TrustKey(raw_key, vf, vt))
    return TrustEntry(fid, str(raw.get("name") or fid), kind, str(raw.get("phone") or ""), tuple(keys))


def own_entry(data_dir: Path, name: str | None = None, kind: str | None = None,
              phone: str | None = None) -> TrustEntry | None:
    """This installation's keys (current and retired) as a trust entry; None before `init`."""
    try:
        cur = current_key_info(data_dir)
    except KeyStoreError:
        if not (Path(data_dir) / "keys").exists():
            return None
        raise
    keys = [TrustKey(public_from_b64(r.public_key_b64), _date_or_none(r.valid_from, "valid_from"),
                     _date_or_none(r.valid_to, "valid_to")) for r in retired_keys(data_dir)]
    # The current key is trusted from any date: it signs only what this installation prints now.
    keys.append(TrustKey(public_from_b64(cur.public_key_b64), None, None))
    if name is None or kind is None or phone is None:
        s = _settings(data_dir)
        if s is not None:
            name = name or s.facility_name
            kind = kind or s.facility_kind
            phone = phone if phone is not None else s.facility_phone
    return TrustEntry(cur.facility_id, name or cur.facility_id, kind or "clinic", phone or "",
                      tuple(keys), own=True)


def _settings(data_dir: Path):
    """The installation's settings; None only when there is no config.toml (a bad one raises)."""
    from clinic.config import CONFIG_FILE, load_settings
    if not (Path(data_dir) / CONFIG_FILE).exists():
        return None
    return load_settings(Path(data_dir))


def _key_cbor(k: TrustKey) -> dict:
    return {"k": k.public_raw, "from": day_number(k.valid_from) if k.valid_from else None,
            "to": day_number(k.valid_to) if k.valid_to else None}


def build_trust_list(entries: Iterable[TrustEntry | Mapping[str, Any]], signer: SigningKey, *,
                     district_name: str | None = None, seq: int | None = None,
                     issued: date | None = None) -> bytes:
    """A signed trust list. The signer is the district's facility key; its own entry (kind
    ``district``) is added when the entries lack it, and must hold the signer's key.

    ``seq`` defaults to the current time in seconds, so each build is newer than the last.
    """
    out: list[TrustEntry] = []
    seen: set[str] = set()
    for i, e in enumerate(entries):
        te = e if isinstance(e, TrustEntry) else entry_from_mapping(e, f"facility {i + 1}")
        if te.facility_id in seen:
            raise TrustListError(f"facility {te.facility_id} appears twice; give each facility once "
                                 f"with all its keys")
        seen.add(te.facility_id)
        out.append(te)
    mine = next((e for e in out if e.facility_id == signer.facility_id), None)
    if mine is None:
        out.append(TrustEntry(signer.facility_id, district_name or signer.facility_id, "district", "",
                              (TrustKey(signer.public_raw),)))
    else:
        if mine.kind != "district":
            raise TrustListError(f"the signer {signer.facility_id} is listed with kind {mine.kind!r}; "
                                 f"a trust list is signed by a district key")
        if not any(k.public_raw == signer.public_raw for k in mine.keys):
            out[out.index(mine)] = TrustEntry(mine.facility_id, mine.name, mine.kind, mine.phone,
                                              mine.keys + (TrustKey(signer.public_raw),))
    doc = {
        "fmt": FORMAT_TAG, "v": FORMAT_VERSION, "district": signer.facility_id,
        "name": district_name or (mine.name if mine else signer.facility_id),
        "seq": int(seq if seq is not None else time.time()),
        "issued": day_number(issued or datetime.now(timezone.utc).date()),
        "facilities": [{"id": e.facility_id, "name": e.name, "kind": e.kind, "phone": e.phone,
                        "keys": [_key_cbor(k) for k in e.keys]} for e in out],
    }
    return cose.sign1(cbor2.dumps(doc, canonical=True), signer)


# ---- reading -----------------------------------------------------------------------

def _decode_list(payload: bytes) -> TrustList:
    try:
        doc = cbor2.loads(payload)
    except Exception as e:  # noqa: BLE001
        raise TrustListError(f"trust list content is not CBOR ({type(e).__name__})") from None
    if not isinstance(doc, dict) or doc.get("fmt") != FORMAT_TAG:
        raise TrustListError("this file is not an rhledger trust list")
    if doc.get("v") != FORMAT_VERSION:
        raise TrustListError(f"trust list format version {doc.get('v')!r}; this installation reads "
                             f"version {FORMAT_VERSION}: update rhledger")
    try:
        entries = []
        for f in doc["facilities"]:
            keys = tuple(TrustKey(bytes(k["k"]),
                                  from_day_number(k["from"]) if k.get("from") is not None else None,
                                  from_day_number(k["to"]) if k.get("to") is not None else None)
                         for k in f["keys"])
            for k in keys:
                if len(k.public_raw) != 32:
                    raise ValueError("key of wrong length")
            if f["kind"] not in FACILITY_KINDS:
                raise ValueError(f"kind {f['kind']!r}")
            entries.append(TrustEntry(str(f["id"]), str(f["name"]), f["kind"], str(f.get("phone") or ""), keys))
        return TrustList(entries, str(doc["district"]), str(doc.get("name") or doc["district"]),
                         int(doc["seq"]), from_day_number(doc["issued"]))
    except (KeyError, TypeError, ValueError, OverflowError) as e:
        raise TrustListError(f"trust list content is malformed ({e})") from None


def read_trust_file(file_bytes: bytes) -> tuple[TrustList, cose.CoseSign1, TrustKey]:
    """Parse and self-verify a trust list: signed by a key of its own district entry."""
    try:
        msg = cose.parse1(file_bytes)
    except CoseFormatError as e:
        raise TrustListError(f"not a signed trust list: {e}") from None
    tl = _decode_list(msg.payload)
    district = tl.entry(tl.district_id)
    if district is None or district.kind != "district":
        raise TrustListError(f"the list names district {tl.district_id} but has no district entry for it")
    for k in district.keys:
        if k.kid == msg.kid:
            try:
                cose.verify_with_public(msg, k.public_raw)
            except CoseFormatError:
                continue
            return tl, msg, k
    raise TrustListError("the trust list's signature does not verify with its district's key: "
                         "the file is damaged or was altered; ask the district for a fresh copy")


@dataclass(frozen=True)
class ImportedTrust:
    district_id: str
    district_name: str
    seq: int
    issued: date
    facilities: int
    fingerprint: str
    first_time: bool
    unchanged: bool


def _pin_path(data_dir: Path) -> Path:
    return Path(data_dir) / TRUST_DIR / PIN_FILE


def _read_pin(data_dir: Path) -> dict | None:
    p = _pin_path(data_dir)
    if not p.exists():
        return None
    try:
        doc = json.loads(p.read_text(encoding="utf-8"))
        public_from_b64(doc["key"])
        return doc
    except (OSError, ValueError, KeyError, TypeError, KeyStoreError) as e:
        raise TrustListError(f"{p} cannot be read ({e}); restore it from a backup or remove the "
                             f"trust folder and import the list again confirming the fingerprint") from None


def _installed(data_dir: Path, pin: dict) -> TrustList | None:
    p = Path(data_dir) / TRUST_DIR / LIST_FILE
    if not p.exists():
        return None
    tl, msg, key = read_trust_file(p.read_bytes())
    pinned = public_from_b64(pin["key"])
    if key.public_raw != pinned or tl.district_id != pin["district_id"]:
        raise TrustListError(f"{p} is not signed by the pinned district key; the file was replaced. "
                             f"Import the district's list again")
    return tl


def import_trust_list(data_dir: Path, file_bytes: bytes, *, expected_fingerprint: str | None = None,
                      today: date | None = None) -> ImportedTrust:
    """Check and install a trust list (rules in the module docstring)."""
    tl, msg, key = read_trust_file(file_bytes)
    fp = key.fingerprint
    pin = _read_pin(data_dir)
    first = pin is None
    if first:
        if expected_fingerprint is None:
            raise DistrictKeyUnconfirmed(fp, tl.district_id)
        if normalise_fingerprint(expected_fingerprint) != fp:
            raise TrustListError(f"the list is signed by the key with fingerprint {fp}, not "
                                 f"{normalise_fingerprint(expected_fingerprint)}: do not import it; "
                                 f"ask the district which file to use")
        current = None
    else:
        if tl.district_id != pin["district_id"]:
            raise TrustListError(f"this list is from district {tl.district_id}; this installation follows "
                                 f"district {pin['district_id']}")
        current = _installed(data_dir, pin)
        authorised = key.public_raw == public_from_b64(pin["key"])
        if not authorised and current is not None:
            d = current.entry(current.district_id)
            authorised = d is not None and any(k.public_raw == key.public_raw and k.valid_on(tl.issued)
                                               for k in d.keys)
        if not authorised:
            raise TrustListError(f"the list is signed by a key (fingerprint {fp}) that this installation "
                                 f"does not hold for district {tl.district_id}; ask the district")
        if expected_fingerprint is not None and normalise_fingerprint(expected_fingerprint) != fp:
            raise TrustListError(f"the list is signed by the key with fingerprint {fp}, not "
                                 f"{normalise_fingerprint(expected_fingerprint)}")
    stored = Path(data_dir) / TRUST_DIR / LIST_FILE
    unchanged = False
    if current is not None:
        if tl.seq < current.seq:
            raise TrustListError(f"this list (number {tl.seq}, issued {tl.issued}) is older than the one "
                                 f"installed (number {current.seq}, issued {current.issued}); not imported")
        if tl.seq == current.seq:
            if stored.read_bytes() != bytes(file_bytes):
                raise TrustListError(f"a different list with the same number {tl.seq} is installed; "
                                     f"ask the district for its newest list")
            unchanged = True
    if not unchanged:
        (Path(data_dir) / TRUST_DIR).mkdir(parents=True, exist_ok=True)
        atomic_write(stored, bytes(file_bytes))
    pin_doc = {"district_id": tl.district_id, "kid": key.kid.hex(), "key": key.key_b64,
               "fingerprint": fp, "pinned_on": (today or datetime.now(timezone.utc).date()).isoformat()}
    if first or pin.get("key") != key.key_b64:
        atomic_write(_pin_path(data_dir), (json.dumps(pin_doc, indent=2) + "\n").encode("utf-8"))
    return ImportedTrust(tl.district_id, tl.district_name or tl.district_id, tl.seq, tl.issued,
                         len(tl.entries), fp, first, unchanged)


def load_trust(data_dir: Path) -> TrustList:
    """The imported list (re-verified against the pinned district key) plus this installation's keys."""
    pin = _read_pin(data_dir)
    tl = _installed(data_dir, pin) if pin else None
    if tl is None:
        tl = TrustList()
    own = own_entry(data_dir)
    if own is not None:
        listed = tl.entry(own.facility_id)
        if listed is None:
            tl.entries.append(own)
        else:
            extra = tuple(k for k in own.keys if all(k.public_raw != x.public_raw for x in listed.keys))
            tl.entries[tl.entries.index(listed)] = TrustEntry(
                listed.facility_id, listed.name, listed.kind, listed.phone, listed.keys + extra, own=True)
    return tl


def trust_info(data_dir: Path) -> dict:
    """What `rhledger trust list` shows."""
    tl = load_trust(data_dir)
    pin = _read_pin(data_dir)
    d = tl.to_dict()
    d["district_fingerprint"] = pin["fingerprint"] if pin else None
    return d


__all__ = ["TrustKey", "TrustEntry", "TrustList", "ImportedTrust", "build_trust_list", "import_trust_list",
           "load_trust", "own_entry", "entry_from_mapping", "read_trust_file", "trust_info",
           "day_number", "from_day_number", "KeyInfo"]
