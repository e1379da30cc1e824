"""COSE_Sign1 (RFC 9052) with EdDSA: the exact bytes an independent implementation makes."""
from __future__ import annotations

import cbor2
import pytest
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

from clinic.signing.cose import parse1, sign1
from clinic.signing.errors import CoseFormatError
from clinic.signing.keys import SigningKey
from clinic.signing.trust import TrustEntry, TrustKey, TrustList


@pytest.fixture()
def key():
    return SigningKey(Ed25519PrivateKey.generate(), "DEMO-CLINIC-A")


@pytest.fixture()
def trust(key):
    return TrustList([TrustEntry("DEMO-CLINIC-A", "Demo A", "clinic", "", (TrustKey(key.public_raw),))])


def test_same_bytes_as_pycose(key):
    from pycose.algorithms import EdDSA
    from pycose.headers import KID, Algorithm
    from pycose.keys import OKPKey
    from pycose.messages import Sign1Message
    d = key._private.private_bytes(serialization.Encoding.Raw, serialization.PrivateFormat.Raw,
                                   serialization.NoEncryption())
    msg = Sign1Message(phdr={Algorithm: EdDSA, KID: key.kid}, payload=b"payload")
    msg.key = OKPKey(crv="Ed25519", x=key.public_raw, d=d)
    assert msg.encode() == sign1(b"payload", key)


def test_structure_is_tag_18_with_alg_and_kid_protected(key):
    obj = cbor2.loads(sign1(b"x", key))
    assert obj.tag == 18
    protected = cbor2.loads(obj.value[0])
    assert protected == {1: -8, 4: key.kid}


def test_trusted_altered_unknown(key, trust):
    m = sign1(b"hello", key)
    assert trust.verify(m).state == "trusted"
    bad = bytearray(m)
    bad[-1] ^= 0x01
    assert trust.verify(bytes(bad)).state == "altered"
    other = SigningKey(Ed25519PrivateKey.generate(), "DEMO-ELSEWHERE")
    v = trust.verify(sign1(b"hello", other))
    assert v.state == "unknown-issuer" and v.facility_id is None


def test_payload_change_is_altered(key, trust):
    obj = cbor2.loads(sign1(b"dose 1500 IU", key)).value
    forged = cbor2.dumps(cbor2.CBORTag(18, [obj[0], {}, b"dose 1250 IU", obj[3]]))
    assert trust.verify(forged).state == "altered"


@pytest.mark.parametrize("junk", [b"", b"\x00", b"not cbor at all \xff\xff", cbor2.dumps([1, 2, 3]),
                                  cbor2.dumps(cbor2.CBORTag(98, [])), cbor2.dumps([b"", {}, b"", b"short"]),
                                  cbor2.dumps([cbor2.dumps({1: -7, 4: b"k"}), {}, b"", bytes(64)]),
                                  cbor2.dumps([cbor2.dumps({1: -8}), {}, b"", bytes(64)])])
def test_non_cose_input_raises_cose_format_error(junk, trust):
    with pytest.raises(CoseFormatError):
        trust.verify(junk)
    with pytest.raises(CoseFormatError):
        parse1(junk)


def test_raw_check_needs_the_signers_public_key(key):
    from clinic.signing.cose import verify_with_public

    m = sign1(b"hello", key)
    assert parse1(m).signed_by(key.public_raw) and verify_with_public(m, key.public_raw) == b"hello"
    other = SigningKey(Ed25519PrivateKey.generate(), "DEMO-ELSEWHERE")
    assert not parse1(m).signed_by(other.public_raw)
    with pytest.raises(CoseFormatError, match="does not match"):
        verify_with_public(m, other.public_raw)
