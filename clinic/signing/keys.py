"""The facility's Ed25519 key pair (RFC 8032): made once at `rhledger init`, never exported.

Files under ``<data>/keys/`` (the folder is mode 0700):

``facility-ed25519.pem``
    the private key, PKCS#8 PEM, mode 0600. Nothing in rhledger reads it except
    ``load_signing_key``; no command prints or exports it.
``facility.json``
    the public half and what it belongs to: facility_id, kid, public key, fingerprint,
    valid_from (the day the key was made).
``retired/<kid>.json``
    one file per key replaced by ``rotate_facility_key``: public key, valid_from, valid_to.
    Only public keys are kept; cards signed with an old key stay verifiable through them
    (this installation) and through the district trust list (everyone else).

Key identifiers: ``kid`` is the first 8 bytes of SHA-256 over the raw 32-byte public key;
it goes in the COSE protected header. The fingerprint that people compare (by phone) is
the first 10 bytes of the same hash, as five groups of four hex digits.
"""
from __future__ import annotations

import base64
import hashlib
import json
import os
import stat
from dataclasses import dataclass
from datetime import date, datetime, timezone
from pathlib import Path

from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey, Ed25519PublicKey
from cryptography.hazmat.primitives.kdf.hkdf import HKDF

from clinic.signing.errors import KeyStoreError
from clinic.signing.files import atomic_write

KEYS_DIR = "keys"
PRIVATE_FILE = "facility-ed25519.pem"
PUBLIC_FILE = "facility.json"
RETIRED_DIR = "retired"
KID_LENGTH = 8
# HKDF (RFC 5869) salt for demo keys made from a seed. A seeded key is as secret as its
# seed: use seeds only for the invented demo data, never for a real installation.
DEMO_SEED_SALT = b"rhledger demo facility key v1"


def raw_public(public_key: Ed25519PublicKey) -> bytes:
    return public_key.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)


def kid_of(public_raw: bytes) -> bytes:
    """Key identifier: first 8 bytes of SHA-256 of the raw public key."""
    return hashlib.sha256(public_raw).digest()[:KID_LENGTH]


def fingerprint_of(public_raw: bytes) -> str:
    """What people compare: 80 bits of SHA-256 of the raw public key, e.g. ``3F2A 91BC 07DE 55A1 C3F0``."""
    h = hashlib.sha256(public_raw).hexdigest()[:20].upper()
    return " ".join(h[i:i + 4] for i in range(0, 20, 4))


def normalise_fingerprint(text: str) -> str:
    """Accept a fingerprint typed with spaces, dashes, colons or lower case."""
    h = "".join(c for c in str(text) if c not in " -:\t").upper()
    return " ".join(h[i:i + 4] for i in range(0, len(h), 4))


def b64(data: bytes) -> str:
    return base64.b64encode(data).decode("ascii")


def public_from_b64(text: str) -> bytes:
    """A raw 32-byte Ed25519 public key from base64 text; KeyStoreError when it is not one."""
    try:
        raw = base64.b64decode(str(text).strip(), validate=True)
    except (ValueError, TypeError):
        raise KeyStoreError(f"public key {str(text)[:60]!r} is not base64 text") from None
    if len(raw) != 32:
        raise KeyStoreError(f"public key is {len(raw)} bytes; an Ed25519 public key is 32 bytes")
    try:
        Ed25519PublicKey.from_public_bytes(raw)
    except ValueError:
        raise KeyStoreError("public key is not a valid Ed25519 key") from None
    return raw


@dataclass(frozen=True)
class KeyInfo:
    """The public facts about a facility key; safe to show and to send to the district."""

    kid: bytes
    fingerprint: str
    public_key_b64: str
    facility_id: str
    valid_from: str | None = None
    valid_to: str | None = None

    @property
    def kid_hex(self) -> str:
        return self.kid.hex()

    def to_dict(self) -> dict:
        return {"facility_id": self.facility_id, "kid": self.kid.hex(), "fingerprint": self.fingerprint,
                "key": self.public_key_b64, "valid_from": self.valid_from, "valid_to": self.valid_to}


class SigningKey:
    """The private key with its kid and facility. Its repr never shows the key."""

    __slots__ = ("_private", "kid", "facility_id", "public_raw")

    def __init__(self, private: Ed25519PrivateKey, facility_id: str):
        self._private = private
        self.public_raw = raw_public(private.public_key())
        self.kid = kid_of(self.public_raw)
        self.facility_id = facility_id

    def sign(self, data: bytes) -> bytes:
        return self._private.sign(data)

    @property
    def public_key(self) -> Ed25519PublicKey:
        return self._private.public_key()

    @property
    def fingerprint(self) -> str:
        return fingerprint_of(self.public_raw)

    @property
    def public_key_b64(self) -> str:
        return b64(self.public_raw)

    def __repr__(self) -> str:
        return f"SigningKey(facility_id={self.facility_id!r}, kid={self.kid.hex()})"

    @classmethod
    def generate(cls, facility_id: str) -> "SigningKey":
        """A fresh key in memory (tests, and the district signer before it is saved)."""
        return cls(Ed25519PrivateKey.generate(), facility_id)

    @classmethod
    def from_seed(cls, facility_id: str, seed: bytes) -> "SigningKey":
        """A deterministic key from a seed, with HKDF-SHA256 (RFC 5869). Demo data only."""
        return cls(_derive(seed, facility_id), facility_id)


def _derive(seed: bytes, facility_id: str) -> Ed25519PrivateKey:
    if not isinstance(seed, (bytes, bytearray)) or len(seed) < 16:
        raise KeyStoreError("a key seed must be at least 16 bytes")
    okm = HKDF(algorithm=hashes.SHA256(), length=32, salt=DEMO_SEED_SALT,
               info=facility_id.encode("utf-8")).derive(bytes(seed))
    return Ed25519PrivateKey.from_private_bytes(okm)


def _keys_dir(data_dir: Path) -> Path:
    return Path(data_dir) / KEYS_DIR


def _today() -> str:
    return datetime.now(timezone.utc).date().isoformat()


def _write_private(path: Path, private: Ed25519PrivateKey) -> None:
    pem = private.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                                serialization.NoEncryption())
    atomic_write(path, pem, mode=0o600)


def _make_dir(d: Path) -> None:
    d.mkdir(parents=True, exist_ok=True)
    os.chmod(d, 0o700)


def _read_public(data_dir: Path) -> dict:
    path = _keys_dir(data_dir) / PUBLIC_FILE
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise KeyStoreError(f"{path} is missing: the facility key was not made here; "
                            f"run `rhledger init --data {data_dir}`") from None
    except (OSError, ValueError) as e:
        raise KeyStoreError(f"{path} cannot be read ({e}); restore it from a backup") from None
    for k in ("facility_id", "key", "kid"):
        if not isinstance(doc.get(k), str):
            raise KeyStoreError(f"{path} lacks {k!r}; restore it from a backup")
    return doc


def _info(doc: dict) -> KeyInfo:
    raw = public_from_b64(doc["key"])
    return KeyInfo(kid=kid_of(raw), fingerprint=fingerprint_of(raw), public_key_b64=doc["key"],
                   facility_id=doc["facility_id"], valid_from=doc.get("valid_from"),
                   valid_to=doc.get("valid_to"))


def _write_public(data_dir: Path, key: SigningKey, valid_from: str) -> KeyInfo:
    doc = {"facility_id": key.facility_id, "kid": key.kid.hex(), "key": key.public_key_b64,
           "fingerprint": key.fingerprint, "valid_from": valid_from, "valid_to": None}
    atomic_write(_keys_dir(data_dir) / PUBLIC_FILE,
                 (json.dumps(doc, indent=2) + "\n").encode("utf-8"), mode=0o644)
    return _info(doc)


def load_signing_key(data_dir: Path) -> SigningKey:
    """The facility's private key, checked against facility.json."""
    d = _keys_dir(data_dir)
    path = d / PRIVATE_FILE
    doc = _read_public(data_dir)
    try:
        st = path.stat()
        pem = path.read_bytes()
    except FileNotFoundError:
        raise KeyStoreError(f"{path} is missing; restore it from a backup, or make a new key with "
                            f"`rhledger keys rotate` (cards already printed stay verifiable only if "
                            f"the old public key is still in the trust list)") from None
    if stat.S_IMODE(st.st_mode) & 0o077:
        raise KeyStoreError(f"{path} can be read by other users (mode {stat.S_IMODE(st.st_mode):o}); "
                            f"run `chmod 600 {path}`")
    try:
        private = serialization.load_pem_private_key(pem, password=None)
    except (ValueError, TypeError):
        raise KeyStoreError(f"{path} is not a readable private key; restore it from a backup") from None
    if not isinstance(private, Ed25519PrivateKey):
        raise KeyStoreError(f"{path} is not an Ed25519 key")
    key = SigningKey(private, doc["facility_id"])
    if key.public_key_b64 != doc["key"]:
        raise KeyStoreError(f"{path} does not match {d / PUBLIC_FILE}: the files come from different keys")
    return key


def ensure_facility_key(data_dir: Path, facility_id: str, seed: bytes | None = None) -> KeyInfo:
    """Make the facility key pair if absent; otherwise return the existing key's public facts.

    ``seed`` gives a deterministic key (HKDF-SHA256), for the invented demo data only.
    """
    facility_id = str(facility_id).strip()
    if not facility_id:
        raise KeyStoreError("facility_id is empty")
    d = _keys_dir(data_dir)
    if (d / PRIVATE_FILE).exists() or (d / PUBLIC_FILE).exists():
        key = load_signing_key(data_dir)
        if key.facility_id != facility_id:
            raise KeyStoreError(f"the key in {d} belongs to facility {key.facility_id}, not {facility_id}; "
                                f"a data directory holds one facility")
        if seed is not None and SigningKey.from_seed(facility_id, seed).public_raw != key.public_raw:
            raise KeyStoreError(f"the key in {d} was not made from the seed given; "
                                f"remove the demo data directory to start over")
        return _info(_read_public(data_dir))
    _make_dir(d)
    key = SigningKey.from_seed(facility_id, seed) if seed is not None else SigningKey.generate(facility_id)
    _write_private(d / PRIVATE_FILE, key._private)
    return _write_public(data_dir, key, _today())


def current_key_info(data_dir: Path) -> KeyInfo:
    return _info(_read_public(data_dir))


def retired_keys(data_dir: Path) -> list[KeyInfo]:
    """Public keys replaced by rotation, oldest first."""
    rd = _keys_dir(data_dir) / RETIRED_DIR
    out = []
    if rd.is_dir():
        for p in sorted(rd.glob("*.json")):
            try:
                doc = json.loads(p.read_text(encoding="utf-8"))
                out.append(_info(doc))
            except (OSError, ValueError, KeyError, TypeError) as e:
                raise KeyStoreError(f"{p} cannot be read ({e}); restore it from a backup") from None
    out.sort(key=lambda k: (k.valid_to or "", k.valid_from or ""))
    return out


def rotate_facility_key(data_dir: Path, *, today: date | None = None) -> KeyInfo:
    """Replace the facility key. The old public key moves to retired/ with valid_to = today.

    Send the new public key (``rhledger keys show --json``) to the district so that the next
    trust list carries it; the district keeps the old one with its end date.
    """
    old = load_signing_key(data_dir)
    old_info = current_key_info(data_dir)
    day = (today or datetime.now(timezone.utc).date()).isoformat()
    d = _keys_dir(data_dir)
    rd = d / RETIRED_DIR
    _make_dir(rd)
    retired = {"facility_id": old.facility_id, "kid": old.kid.hex(), "key": old.public_key_b64,
               "fingerprint": old.fingerprint, "valid_from": old_info.valid_from, "valid_to": day}
    atomic_write(rd / f"{old.kid.hex()}.json", (json.dumps(retired, indent=2) + "\n").encode("utf-8"))
    new = SigningKey.generate(old.facility_id)
    _write_private(d / PRIVATE_FILE, new._private)
    return _write_public(data_dir, new, day)


def verify_raw(public_raw: bytes, signature: bytes, data: bytes) -> bool:
    """True when ``signature`` is a valid Ed25519 signature of ``data`` under ``public_raw``."""
    from cryptography.exceptions import InvalidSignature
    try:
        Ed25519PublicKey.from_public_bytes(public_raw).verify(signature, data)
        return True
    except (InvalidSignature, ValueError):
        return False
