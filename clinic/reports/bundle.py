"""District bundles: a clinic's records, signed, compressed, carried to the district.

The format is described in docs/bundle-format.md. In short, a ``.rhlb`` file is

    magic  b"RHLB" + one byte format version (1)
    u32    length of the signed header, big-endian
    header COSE_Sign1 (clinic.signing.cose) over a CBOR map: format, version, facility,
           since, until, made_at, bundle_id, record count, counts per kind, schema version,
           compression, SHA-256 and length of the body
    body   zlib-compressed CBOR array of the full stored records (envelope, amendments)

The signature covers the header, the header covers the body by its SHA-256, so one
changed byte anywhere is found. Import refuses a bundle (importing none of it) when the
file does not parse, the signer is not in the trust list, the signature or the body hash
does not match, the header disagrees with its signer or its body, or any record fails
validation. Only then are the records merged, in one Store.merge_foreign_many call (the
same result as Store.merge_foreign on each, one partition rewrite each), which makes import
idempotent and independent of order.
"""
from __future__ import annotations

import hashlib
import json
import os
import struct
import uuid
import zlib
from collections import Counter
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Iterable

import cbor2

from clinic.records.schema import KINDS, SCHEMA_VERSION
from clinic.records.validate import ValidationError, validate_record
from clinic.records.values import parse_utc, utc_text
from clinic.signing.files import atomic_write
from clinic.store.errors import Conflict, StoreError

MAGIC = b"RHLB"
FORMAT_ID = "rhledger-bundle"
FORMAT_VERSION = 1
EXTENSION = ".rhlb"
MAX_HEADER = 64 * 1024
# A month of a busy clinic is well under this; refuse anything that could exhaust memory.
MAX_BODY = 512 * 1024 * 1024
EXPORTS_DIR = "exports"
IMPORTS_DIR = "imports"
STATE_FILE = "state.json"
LEDGER_FILE = "exported.json"
LOG_FILE = "log.jsonl"
FACILITIES_FILE = "facilities.json"


class BundleError(Exception):
    """Base class of bundle failures."""


class BundleRefused(BundleError):
    """A bundle that was not imported (nothing of it was); the message says why and what to do."""

    reason = "refused"


class BundleUnreadable(BundleRefused):
    """The file is not a bundle, or is truncated or damaged beyond reading."""

    reason = "unreadable"


class BundleUntrusted(BundleRefused):
    """The bundle is signed by a key this installation's trust list does not hold."""

    reason = "unknown-issuer"


class BundleAltered(BundleRefused):
    """The signature or the body checksum does not match: changed or damaged after signing."""

    reason = "altered"


class BundleInvalid(BundleRefused):
    """The bundle is authentic but a record in it fails validation."""

    reason = "invalid"


class BundleNotOwner(BundleRefused):
    """The bundle carries records of a facility other than the one that signed it."""

    reason = "not-owner"


class ExportError(BundleError):
    """The export cannot be made (say what to do)."""


# ---- the file -----------------------------------------------------------------------

def _canonical(obj) -> bytes:
    return cbor2.dumps(obj, canonical=True)


def care_of(settings) -> dict:
    """What the district needs to plan this facility's pregnancies as the facility does."""
    return {"profile": settings.profile, "overrides": dict(settings.profile_overrides),
            "timezone": settings.timezone, "rhd_negative_frequency": settings.rhd_negative_frequency,
            "maternal_blood_volume_ml": settings.maternal_blood_volume_ml,
            "products": [{"name": p.name, "vial_iu": p.vial_iu, "routes": list(p.routes)} for p in settings.products]}


def encode_bundle(records: list[dict], *, key, facility: str, since: str | None, until: str,
                  made_at: str, bundle_id: str | None = None, care: dict | None = None) -> bytes:
    """The bytes of a bundle of ``records``, signed with ``key`` (a clinic.signing SigningKey)."""
    from clinic.signing.cose import sign1

    body = zlib.compress(_canonical(records), 6)
    kinds = Counter(r.get("kind", "") for r in records)
    header = {
        "format": FORMAT_ID,
        "version": FORMAT_VERSION,
        "facility": facility,
        "since": since,
        "until": until,
        "made_at": made_at,
        "bundle_id": bundle_id or str(uuid.uuid4()),
        "count": len(records),
        "kinds": dict(sorted(kinds.items())),
        "schema": SCHEMA_VERSION,
        "compression": "zlib",
        "body_sha256": hashlib.sha256(body).digest(),
        "body_length": len(body),
    }
    if care is not None:
        header["care"] = care
    signed = sign1(_canonical(header), key)
    return MAGIC + bytes([FORMAT_VERSION]) + struct.pack(">I", len(signed)) + signed + body


@dataclass
class Bundle:
    """A bundle whose signature, checksum and records were all checked."""

    header: dict
    records: list[dict]
    signer: str
    sha256: str            # of the whole file: the bundle's identity in the import log
    name: str = ""

    @property
    def facility(self) -> str:
        return self.header["facility"]


def _split(data: bytes, name: str) -> tuple[bytes, bytes]:
    if len(data) < 9 or data[:4] != MAGIC:
        raise BundleUnreadable(f"{name} is not an rhledger bundle (it does not start with {MAGIC!r}); "
                               f"bundles are made with `rhledger export` and end in {EXTENSION}")
    if data[4] != FORMAT_VERSION:
        raise BundleUnreadable(f"{name} is bundle format version {data[4]}; this rhledger reads version "
                               f"{FORMAT_VERSION}: update rhledger on the district laptop")
    (n,) = struct.unpack(">I", data[5:9])
    if n > MAX_HEADER or 9 + n > len(data):
        raise BundleUnreadable(f"{name} is truncated or damaged (header length {n}); copy it again from the clinic")
    return data[9:9 + n], data[9 + n:]


def read_bundle(data: bytes, trust, *, name: str = "bundle", now: datetime | None = None,
                check=None) -> Bundle:
    """Check everything about a bundle and return its records, or raise BundleRefused."""
    from clinic.signing.errors import CoseFormatError

    now = now or datetime.now(timezone.utc)
    signed, body = _split(data, name)
    try:
        v = trust.verify(signed, on_date=now.date())
    except CoseFormatError as e:
        raise BundleUnreadable(f"{name}: the signed header cannot be read ({e}); "
                               f"copy it again from the clinic") from None
    if v.state == "unknown-issuer":
        raise BundleUntrusted(f"{name} is refused: {v.reason or 'the signer is not in the trust list'}. "
                              f"Add the clinic's key to the district trust list (compare its fingerprint "
                              f"by phone), then import again.")
    if v.state != "trusted":
        raise BundleAltered(f"{name} is refused: it was changed or damaged after the clinic signed it "
                            f"({v.reason or v.state}). Ask the clinic to export it again.")
    try:
        header = cbor2.loads(v.payload)
    except Exception as e:  # noqa: BLE001 - cbor2 raises several types on bad input
        raise BundleUnreadable(f"{name}: the signed header is not CBOR ({type(e).__name__})") from None
    if not isinstance(header, dict) or header.get("format") != FORMAT_ID:
        raise BundleUnreadable(f"{name} is signed but is not an rhledger bundle header")
    if header.get("version") != FORMAT_VERSION:
        raise BundleUnreadable(f"{name}: header says format version {header.get('version')!r}; "
                               f"this rhledger reads {FORMAT_VERSION}")
    if header.get("facility") != v.facility_id:
        raise BundleAltered(f"{name} is refused: it says it comes from {header.get('facility')!r} but is "
                            f"signed by the key of {v.facility_id!r}")
    if len(body) != header.get("body_length") or hashlib.sha256(body).digest() != header.get("body_sha256"):
        raise BundleAltered(f"{name} is refused: its records do not match the signed checksum "
                            f"(changed or damaged after signing). Ask the clinic to export it again.")
    if header.get("compression") != "zlib":
        raise BundleUnreadable(f"{name}: compression {header.get('compression')!r} is not supported")
    try:
        d = zlib.decompressobj()
        raw = d.decompress(body, MAX_BODY)
        if d.unconsumed_tail:
            raise BundleUnreadable(f"{name}: the records are larger than {MAX_BODY // (1024 * 1024)} MB; "
                                   f"export in smaller pieces with --since")
        records = cbor2.loads(raw)
    except BundleRefused:
        raise
    except Exception as e:  # noqa: BLE001 - zlib.error or a cbor2 decode error
        raise BundleUnreadable(f"{name}: the records cannot be read ({type(e).__name__})") from None
    if not isinstance(records, list) or len(records) != header.get("count"):
        raise BundleInvalid(f"{name}: the header counts {header.get('count')} records but the body holds "
                            f"{len(records) if isinstance(records, list) else 'no list of'} records")
    check_owner(records, v.facility_id, name=name)
    check_records(records, name=name, until=header.get("until"), now=now, check=check)
    return Bundle(header, records, v.facility_id, hashlib.sha256(data).hexdigest(), name)


def check_owner(records: list, facility: str, *, name: str) -> None:
    """A facility's signature covers only its own records: BundleNotOwner when any record names
    another facility (nothing of the bundle is imported)."""
    foreign = [(i, r) for i, r in enumerate(records) if isinstance(r, dict) and r.get("facility") != facility]
    if not foreign:
        return
    shown = "; ".join(f"record {i + 1} ({r.get('kind')} {r.get('id')}) names {r.get('facility')!r}"
                      for i, r in foreign[:5])
    raise BundleNotOwner(f"{name} is refused, nothing imported: it is signed by {facility} but "
                         f"{len(foreign)} of its records belong to another facility ({shown}). A bundle "
                         f"carries only the signing facility's own records; each facility sends its own. "
                         f"Ask {facility} to export again with an up-to-date rhledger.")


def check_records(records: list, *, name: str, until: str | None, now: datetime, check=None) -> None:
    """Every record must be one the store would accept; BundleInvalid names the first bad ones.

    ``check(record, now)`` raises ValidationError (or StoreError) for a record that cannot be
    merged; the default checks the envelope and validates the fields with
    clinic.records.validate, as Store.merge_foreign does.
    """
    problems: list[str] = []
    # Validation refuses dates after "now": a clinic's clock may be ahead of the district's.
    when = now
    if until:
        try:
            when = max(now, parse_utc(until))
        except (ValueError, TypeError, AttributeError):
            raise BundleInvalid(f"{name}: header 'until' {until!r} is not a UTC date-time") from None
    check = check or _default_check
    ids = set()
    for i, r in enumerate(records):
        if not isinstance(r, dict):
            problems.append(f"record {i + 1} is not a record")
            continue
        rid, kind = r.get("id"), r.get("kind")
        where = f"record {i + 1} ({kind} {rid})"
        if rid in ids:
            problems.append(f"{where}: the same id appears twice")
        ids.add(rid)
        try:
            check(r, when)
        except (ValidationError, StoreError) as e:  # a Conflict is a StoreError
            problems.append(f"{where}: {e}")
        if len(problems) >= 5:
            break
    if problems:
        raise BundleInvalid(f"{name} is refused, nothing imported: " + "; ".join(problems))


def _default_check(r: dict, now: datetime) -> None:
    spec = KINDS.get(r.get("kind"))
    if spec is None:
        raise ValidationError({"kind": f"{r.get('kind')!r} is not a record kind"})
    errors = {}
    for key in ("id", "facility", "created_at", "created_by"):
        if not isinstance(r.get(key), str) or not r.get(key):
            errors[key] = "is missing"
    if not isinstance(r.get("version"), int) or r["version"] < 1:
        errors["version"] = "must be a whole number from 1"
    if errors:
        raise ValidationError(errors, r.get("kind"))
    validate_record(r["kind"], {k: r[k] for k in spec.field_names if k in r and r[k] is not None}, now=now)


def store_check(store):
    """The check of Store.merge_foreign, run before anything is merged (and a kind clash)."""
    def check(r: dict, now: datetime) -> None:
        store.check_foreign(r, now)
        local = store.get(r["id"])
        if local is not None and local["kind"] != r["kind"]:
            raise Conflict(f"{r['id']} is a {local['kind']} here but a {r['kind']} in the bundle")
    return check


# ---- export -------------------------------------------------------------------------

def _record_hash(r: dict) -> str:
    return hashlib.sha256(json.dumps(r, sort_keys=True, ensure_ascii=False, default=str)
                          .encode("utf-8")).hexdigest()[:24]


def _atomic_json(path: Path, obj) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    with open(tmp, "w", encoding="utf-8") as fh:
        json.dump(obj, fh, ensure_ascii=False, indent=1, sort_keys=True)
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, path)


def _read_json(path: Path, default):
    if not path.exists():
        return default
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except ValueError as e:
        raise ExportError(f"{path} does not parse ({e}); delete it to export everything again "
                          f"(the district's import ignores what it already has)") from None


def export_state(data_dir: Path) -> dict:
    """{"last_until": UTC text or None, "exports": [...]} of this installation."""
    return _read_json(Path(data_dir) / EXPORTS_DIR / STATE_FILE, {"last_until": None, "exports": []})


@dataclass
class ExportResult:
    path: Path
    count: int
    since: str | None
    until: str
    kinds: dict
    sha256: str


def parse_since(text: str | None) -> str | None:
    """'LAST' (None), or a date or UTC date-time to canonical UTC text."""
    if text is None or str(text).strip().upper() in ("", "LAST"):
        return None
    s = str(text).strip()
    try:
        dt = datetime.fromisoformat(s.replace("Z", "+00:00"))
    except ValueError:
        raise ExportError(f"--since {s!r}: write LAST, a date 2026-11-01 or a UTC time 2026-11-01T00:00:00Z") from None
    if dt.tzinfo is None:
        dt = dt.replace(tzinfo=timezone.utc)
    return utc_text(dt)


def export_bundle(store, data_dir: Path, *, facility: str, out: Path | None = None,
                  since: str | None = "LAST", now: datetime | None = None, key=None) -> ExportResult:
    """Write a bundle of what changed since the last export (``since="LAST"``) or since a time.

    "Since the last export" is kept by content, not by clock: every record whose content
    differs from what an earlier export carried goes in, so a record a phone made offline
    days ago and synced today is not left out. With an explicit time, every record created
    or amended at or after it goes in.
    """
    from clinic.signing.keys import load_signing_key

    data_dir = Path(data_dir)
    now = (now or datetime.now(timezone.utc)).astimezone(timezone.utc)
    until = utc_text(now)
    key = key or load_signing_key(data_dir)
    if key.facility_id != facility:
        raise ExportError(f"the signing key belongs to {key.facility_id}, this installation is {facility}")
    state = export_state(data_dir)
    ledger_path = data_dir / EXPORTS_DIR / LEDGER_FILE
    use_ledger = since is None or str(since).strip().upper() == "LAST"
    since_text = state.get("last_until") if use_ledger else parse_since(since)
    ledger = _read_json(ledger_path, {}) if use_ledger else None
    records = []
    hashes = {}
    # Only this facility's own records: its signature vouches for nothing else (records of
    # other facilities that came here on cards reach the district in their own bundles).
    for r in store.iter_records(since=None if use_ledger else since_text, facility=facility):
        if r.get("kind") not in KINDS:
            continue
        h = _record_hash(r)
        if use_ledger and ledger.get(r["id"]) == h:
            continue
        records.append(r)
        hashes[r["id"]] = h
    records.sort(key=lambda r: (r.get("created_at") or "", r["id"]))
    data = encode_bundle(records, key=key, facility=facility, since=since_text, until=until, made_at=until,
                         care=care_of(store.settings))
    if out is None:
        out = data_dir / EXPORTS_DIR / f"{facility}-{now.strftime('%Y%m%dT%H%M%SZ')}{EXTENSION}"
    out = Path(out)
    atomic_write(out, data, 0o644)   # fsync'd before the rename: a power cut leaves no half bundle
    sha = hashlib.sha256(data).hexdigest()
    if use_ledger:
        ledger.update(hashes)
        _atomic_json(ledger_path, ledger)
    state["last_until"] = until if use_ledger else state.get("last_until")
    state.setdefault("exports", []).append({"file": out.name, "since": since_text, "until": until,
                                            "count": len(records), "sha256": sha,
                                            "mode": "last" if use_ledger else "since"})
    _atomic_json(data_dir / EXPORTS_DIR / STATE_FILE, state)
    return ExportResult(out, len(records), since_text, until, dict(Counter(r["kind"] for r in records)), sha)


# ---- import -------------------------------------------------------------------------

@dataclass
class ImportResult:
    name: str
    status: str                  # "imported" | "refused"
    facility: str = ""
    sha256: str = ""
    count: int = 0
    outcomes: dict = field(default_factory=dict)   # created / updated / unchanged / kept-local
    message: str = ""
    reason: str = ""
    already: bool = False        # the same bundle was imported before (nothing changed)

    def to_dict(self) -> dict:
        return {"name": self.name, "status": self.status, "facility": self.facility,
                "sha256": self.sha256, "count": self.count, "outcomes": self.outcomes,
                "message": self.message, "reason": self.reason, "already": self.already}


def import_log(data_dir: Path) -> list[dict]:
    path = Path(data_dir) / IMPORTS_DIR / LOG_FILE
    if not path.exists():
        return []
    out = []
    for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
        if line.strip():
            try:
                out.append(json.loads(line))
            except ValueError:
                raise BundleError(f"{path} line {n} does not parse; the log is only a record, "
                                  f"move the file aside to start a new one") from None
    return out


def _log(data_dir: Path, entry: dict) -> None:
    path = Path(data_dir) / IMPORTS_DIR / LOG_FILE
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "a", encoding="utf-8") as fh:
        fh.write(json.dumps(entry, ensure_ascii=False, sort_keys=True) + "\n")
        fh.flush()
        os.fsync(fh.fileno())


def import_bundle(store, data_dir: Path, data: bytes, *, name: str, trust=None,
                  now: datetime | None = None, by: str | None = None) -> ImportResult:
    """Check one bundle completely, then merge its records. A refusal imports nothing.

    ``by``: the person importing (named in the audit trail); else "import:bundle:<facility>".

    Returns an ImportResult; a refused bundle has status "refused" and a message (the
    reason is also in the import log).
    """
    from clinic.signing.trust import load_trust

    now = (now or datetime.now(timezone.utc)).astimezone(timezone.utc)
    trust = trust if trust is not None else load_trust(Path(data_dir))
    sha = hashlib.sha256(data).hexdigest()
    try:
        b = read_bundle(data, trust, name=name, now=now, check=store_check(store))
    except BundleRefused as e:
        res = ImportResult(name, "refused", sha256=sha, message=str(e), reason=e.reason)
        _log(data_dir, {"at": utc_text(now), **res.to_dict()})
        return res
    already = any(e.get("sha256") == sha and e.get("status") == "imported" for e in import_log(data_dir))
    outcomes = Counter()
    # The same "now" as the check in read_bundle, so a record that passed it cannot fail here.
    when = max(now, parse_utc(b.header["until"])) if b.header.get("until") else now
    outcomes.update(store.merge_foreign_many(merge_order(b.records), by=by or f"import:bundle:{b.facility}",
                                             now=when, signer=b.facility))
    res = ImportResult(name, "imported", b.facility, sha, len(b.records), dict(sorted(outcomes.items())),
                       already=already)
    _remember_care(data_dir, b)
    res.message = (f"{name}: {len(b.records)} records from {b.facility} "
                   f"({', '.join(f'{v} {k}' for k, v in sorted(outcomes.items())) or 'empty'})"
                   + (" - this bundle was imported before; nothing new" if already else ""))
    _log(data_dir, {"at": utc_text(now), "since": b.header.get("since"), "until": b.header.get("until"),
                    "bundle_id": b.header.get("bundle_id"), **res.to_dict()})
    return res


def facility_care(data_dir: Path) -> dict[str, dict]:
    """{facility: {"care": {...}, "until": ...}} from the newest bundle of each facility."""
    return _read_json(Path(data_dir) / IMPORTS_DIR / FACILITIES_FILE, {})


def _remember_care(data_dir: Path, b: Bundle) -> None:
    care = b.header.get("care")
    if not isinstance(care, dict):
        return
    known = facility_care(data_dir)
    mine = known.get(b.facility)
    if mine is None or (mine.get("until") or "") <= (b.header.get("until") or ""):
        known[b.facility] = {"care": care, "until": b.header.get("until")}
        _atomic_json(Path(data_dir) / IMPORTS_DIR / FACILITIES_FILE, known)


_PARENT_RANK = {"woman": 0, "pregnancy": 1}


def merge_order(records: Iterable[dict]) -> list[dict]:
    """Parents before children (women, then pregnancies, then entries), stable."""
    return sorted(records, key=lambda r: _PARENT_RANK.get(r.get("kind"), 2))


def import_files(store, data_dir: Path, paths: Iterable[Path], *, now: datetime | None = None) -> list[ImportResult]:
    """Import several bundle files; each is accepted or refused on its own."""
    from clinic.signing.trust import load_trust

    trust = load_trust(Path(data_dir))
    results = []
    for p in paths:
        p = Path(p)
        try:
            data = p.read_bytes()
        except OSError as e:
            results.append(ImportResult(p.name, "refused", message=f"{p}: cannot be read ({e.strerror})",
                                        reason="unreadable"))
            continue
        results.append(import_bundle(store, data_dir, data, name=p.name, trust=trust, now=now))
    return results
