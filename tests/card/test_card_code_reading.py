"""Reading a card code: scanner quirks are tolerated, everything else gets the decoder's own
clear reason, and nothing ever raises."""
from __future__ import annotations

import base45
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from clinic.card import qrtext
from clinic.card.codec import TRUST_STATES, read_card
from clinic.signing.cose import sign1
from clinic.signing.keys import SigningKey
from clinic.signing.trust import TrustList


@pytest.mark.parametrize("wrap", [
    lambda t: t + "\r\n",            # the scanner's Enter
    lambda t: t + "\n",
    lambda t: "  " + t + " \t",       # stray whitespace around
    lambda t: t.lower(),              # Caps Lock / case-swapping scanner
    lambda t: t.swapcase() + "\r",
])
def test_scanner_quirks_still_read_trusted(full_card, trust, wrap):
    r = read_card(wrap(full_card.text), trust, via="scanner")
    assert r.trust == "trusted" and r.code == full_card.code


def test_interior_spaces_are_kept(full_card, trust):
    assert " " in full_card.text[5:] or True  # space is a Base45 character
    squeezed = full_card.text[:5] + full_card.text[5:].replace(" ", "")
    if squeezed != full_card.text:
        assert read_card(squeezed, trust).trust != "trusted"


def test_unknown_key_is_readable_but_unknown_issuer(full, trust):
    from clinic.card.codec import make_card_text
    w, p, e = full
    stranger = SigningKey.from_seed("DEMO-ELSEWHERE", b"some other facility seed")
    ct = make_card_text(w, p, e, key=stranger, issue=1, issued_at="2026-11-20T12:00:00Z",
                        issuer_name="Elsewhere Demo Post", issuer_phone="+000 555 0999")
    r = read_card(ct.text, trust)
    assert r.trust == "unknown-issuer" and r.content is not None
    assert r.issuer["phone"] == "+000 555 0999"
    assert "unsigned paper record" in r.advice


@pytest.mark.parametrize("text, stage, words", [
    ("", "prefix", "empty"),
    ("hello world", "prefix", "not an rhledger card code"),
    ("RHL2:ABCDEF", "version", "format version 2"),
    ("RHL0:ABCDEF", "version", "format version 0"),
    ("RHL1:", "body", "no content"),
    ("RHL1:A", "body", "length"),
    ("RHL1:ÄBC", "body", "keyboard layout"),
    ("RHL1::::", "body", "out of range"),
    ("RHL1:" + base45.b45encode(b"\x07abc").decode(), "body", "packing mode"),
    ("RHL1:" + base45.b45encode(b"\x01\xff\xfe\xfd").decode(), "body", "compressed"),
    ("RHL1:" + base45.b45encode(b"\x00not cose").decode(), "cose", "not a signed record"),
])
def test_bad_text_gets_a_reason(text, stage, words, trust):
    r = read_card(text, trust)
    assert r.trust == "unreadable" and r.stage == stage and words in r.reason, r.reason
    assert r.content is None


def test_truncated_text_is_unreadable_or_altered_never_trusted(full_card, trust):
    for cut in (1, 2, 3, 7, 30, len(full_card.text) // 2, len(full_card.text) - 6):
        r = read_card(full_card.text[:-cut], trust)
        assert r.trust in ("unreadable", "altered"), (cut, r.trust)
    r = read_card(full_card.text[:-30], trust)
    assert r.trust == "unreadable" and ("incomplete" in r.reason or "length" in r.reason), r.reason


def test_one_changed_character_fails_verification(full_card, trust):
    text = full_card.text
    alphabet = qrtext.BASE45_ALPHABET
    for i in range(len(qrtext.PREFIX), len(text)):  # every position
        c = text[i]
        other = alphabet[(alphabet.index(c) + 1) % 45]
        r = read_card(text[:i] + other + text[i + 1:], trust)
        assert r.trust != "trusted", f"position {i}"
        assert r.trust in TRUST_STATES and r.reason


def test_one_changed_byte_of_the_signed_message_fails_verification(full_card, trust):
    m = full_card.message
    for i in range(len(m)):  # every byte
        bad = bytearray(m)
        bad[i] ^= 0x10
        r = read_card(qrtext.pack(bytes(bad)), trust)
        assert r.trust in ("altered", "unreadable", "unknown-issuer"), i
        assert r.trust != "trusted"


def test_changed_payload_with_a_known_kid_is_altered(full_card, clinic_key, trust):
    import cbor2
    obj = cbor2.loads(full_card.message).value
    body = obj[2].replace(b"LOT-DX4412", b"LOT-DX9999")
    assert body != obj[2]
    forged = cbor2.dumps(cbor2.CBORTag(18, [obj[0], {}, body, obj[3]]))
    r = read_card(qrtext.pack(forged), trust)
    assert r.trust == "altered" and "do not rely" in r.advice.lower()


def test_card_signed_with_another_payload_version_says_so(clinic_key, trust):
    import cbor2
    text = qrtext.pack(sign1(cbor2.dumps({"v": 2, "i": ["DEMO-CLINIC-NORTH", 1, 1790000000]}), clinic_key))
    r = read_card(text, trust)
    assert r.trust == "unreadable" and "version 2" in r.reason


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=300))
def test_random_text_never_raises(text):
    r = read_card(text, TrustList())
    assert r.trust == "unreadable" and r.reason


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet=qrtext.BASE45_ALPHABET, max_size=400))
def test_random_base45_behind_the_prefix_never_raises(body):
    r = read_card(qrtext.PREFIX + body, TrustList())
    assert r.trust in ("unreadable", "unknown-issuer", "altered") and r.reason
    assert r.stage != "internal", r.reason


@settings(max_examples=200, deadline=None)
@given(st.binary(max_size=600), st.sampled_from([0, 1]))
def test_random_bytes_behind_the_prefix_never_raise(data, mode):
    import zlib
    if mode:
        c = zlib.compressobj(9, zlib.DEFLATED, -15)
        data = c.compress(data) + c.flush()
    r = read_card(qrtext.PREFIX + base45.b45encode(bytes([mode]) + data).decode(), TrustList())
    assert r.trust != "trusted" and r.stage != "internal", r.reason


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_random_cbor_inside_a_valid_signature_never_raises(data, clinic_key, trust):
    import cbor2
    leaves = st.one_of(st.integers(-2 ** 40, 2 ** 40), st.text(max_size=8), st.binary(max_size=18),
                       st.booleans(), st.none())
    tree = st.recursive(
        leaves,
        lambda kids: st.one_of(
            st.lists(kids, max_size=5),
            st.dictionaries(st.one_of(st.integers(0, 12), st.text(max_size=2)), kids, max_size=5),
        ),
        max_leaves=30,
    )
    doc = data.draw(st.dictionaries(st.sampled_from(["v", "i", "n", "f", "w", "p", "e", "t"]), tree))
    if data.draw(st.booleans()):
        doc["v"] = 1
    r = read_card(qrtext.pack(sign1(cbor2.dumps(doc), clinic_key)), trust)
    assert r.trust in ("unreadable", "trusted") and r.stage != "internal", r.reason
