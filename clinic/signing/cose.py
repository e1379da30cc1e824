"""COSE_Sign1 (RFC 9052, section 4.2) with EdDSA over Ed25519 (RFC 9053, alg -8).

Written with cbor2 and cryptography rather than a COSE library so that the exact bytes are
ours to document: the message is the CBOR tag 18 around
``[protected: bstr, unprotected: {}, payload: bstr, signature: bstr]``, the protected
header is the deterministic CBOR map ``{1: -8, 4: kid}``, and the signature covers the
``Sig_structure`` ``["Signature1", protected, h'', payload]`` (external AAD empty).

Used for patient-held cards, the district trust list, and district bundles: the payload is
opaque here, and so is who the signer is: this module checks a signature against a public
key it is given; which keys to believe, and for which dates, is ``clinic.signing.trust``
(``TrustList.verify``).
"""
from __future__ import annotations

from dataclasses import dataclass

import cbor2

from clinic.signing.errors import CoseFormatError
from clinic.signing.keys import SigningKey, verify_raw

COSE_SIGN1_TAG = 18
HDR_ALG = 1
HDR_KID = 4
ALG_EDDSA = -8
# A message larger than this is not something we made (cards are < 2 kB, lists < 1 MB).
MAX_MESSAGE = 4 * 1024 * 1024


@dataclass(frozen=True)
class CoseSign1:
    """A parsed, not yet verified, COSE_Sign1 message."""

    protected: bytes
    payload: bytes
    signature: bytes
    kid: bytes
    alg: int

    def to_be_signed(self) -> bytes:
        return _sig_structure(self.protected, self.payload)

    def signed_by(self, public_raw: bytes) -> bool:
        """Whether the raw Ed25519 public key ``public_raw`` made this signature."""
        return verify_raw(public_raw, self.signature, self.to_be_signed())


def _sig_structure(protected: bytes, payload: bytes) -> bytes:
    return cbor2.dumps(["Signature1", protected, b"", payload], canonical=True)


def protected_header(kid: bytes) -> bytes:
    return cbor2.dumps({HDR_ALG: ALG_EDDSA, HDR_KID: bytes(kid)}, canonical=True)


def sign1(payload: bytes, key: SigningKey) -> bytes:
    """A tagged COSE_Sign1 message over ``payload``, signed with the facility key."""
    if not isinstance(payload, (bytes, bytearray)):
        raise TypeError("payload must be bytes")
    protected = protected_header(key.kid)
    signature = key.sign(_sig_structure(protected, bytes(payload)))
    return cbor2.dumps(cbor2.CBORTag(COSE_SIGN1_TAG, [protected, {}, bytes(payload), signature]),
                       canonical=True)


def parse1(message: bytes) -> CoseSign1:
    """Parse a COSE_Sign1 message without verifying it. CoseFormatError says what is wrong."""
    if not isinstance(message, (bytes, bytearray)):
        raise CoseFormatError("a COSE message is bytes")
    if len(message) > MAX_MESSAGE:
        raise CoseFormatError(f"{len(message)} bytes is far too large for a COSE_Sign1 message here")
    try:
        obj = cbor2.loads(bytes(message))
    except Exception as e:  # noqa: BLE001 - cbor2 raises several types on bad input
        raise CoseFormatError(f"not CBOR ({type(e).__name__}: {e})") from None
    if isinstance(obj, cbor2.CBORTag):
        if obj.tag != COSE_SIGN1_TAG:
            raise CoseFormatError(f"CBOR tag {obj.tag} is not COSE_Sign1 (tag 18)")
        obj = obj.value
    if not isinstance(obj, (list, tuple)) or len(obj) != 4:
        raise CoseFormatError("not a COSE_Sign1 structure (an array of 4 items)")
    protected, unprotected, payload, signature = obj
    if isinstance(unprotected, cbor2.frozendict):  # how cbor2 returns a map inside a tag
        unprotected = dict(unprotected)
    if not isinstance(protected, bytes) or not isinstance(unprotected, dict):
        raise CoseFormatError("COSE_Sign1 headers are malformed")
    if not isinstance(payload, bytes):
        raise CoseFormatError("COSE_Sign1 payload is missing or detached")
    if not isinstance(signature, bytes):
        raise CoseFormatError("COSE_Sign1 signature is not a byte string")
    try:
        hdr = cbor2.loads(protected) if protected else {}
    except Exception as e:  # noqa: BLE001
        raise CoseFormatError(f"protected header is not CBOR ({type(e).__name__})") from None
    if not isinstance(hdr, dict):
        raise CoseFormatError("protected header is not a map")
    try:
        alg = hdr.get(HDR_ALG)
    except TypeError:  # an unhashable key cannot be ours
        raise CoseFormatError("protected header is malformed") from None
    if alg != ALG_EDDSA:
        raise CoseFormatError(f"signature algorithm {alg!r} is not supported; only EdDSA (-8)")
    try:
        kid = hdr.get(HDR_KID, unprotected.get(HDR_KID))
    except TypeError:
        raise CoseFormatError("headers are malformed") from None
    if not isinstance(kid, bytes) or not kid:
        raise CoseFormatError("COSE_Sign1 message carries no key identifier (kid)")
    if len(signature) != 64:
        raise CoseFormatError(f"signature is {len(signature)} bytes; an Ed25519 signature is 64")
    return CoseSign1(protected=protected, payload=payload, signature=signature, kid=kid, alg=alg)


def verify_with_public(message: bytes | CoseSign1, public_raw: bytes) -> bytes:
    """The payload when ``message`` is signed by ``public_raw``; CoseFormatError otherwise."""
    msg = message if isinstance(message, CoseSign1) else parse1(message)
    if not msg.signed_by(public_raw):
        raise CoseFormatError("the signature does not match the key")
    return msg.payload
