"""The QR version reached by the largest history in the tests, and what happens beyond it.

Figures (asserted, so a change to the format shows here): the full history (woman, pregnancy,
typing, partner, fetal RHD, four screens with titres, two events, three doses, birth: 15
records, each with its 128-bit UUID) is a 1208-byte CBOR payload, a 1294-byte COSE_Sign1
message, about 1345 characters of card text: QR version 25 at level M (117 modules),
printed 54 mm wide (module 0.43 mm). See docs/card-format.md for why this and not version 15.
"""
from __future__ import annotations

from clinic.card.codec import MAX_QR_VERSION, QR_EC_LEVEL, make_card_text, qr_version_for


def test_largest_history_reaches_version_25_at_level_m(full_card):
    assert (full_card.qr_version, full_card.qr_ec, full_card.omitted) == (25, "M", 0)
    assert full_card.qr_version <= MAX_QR_VERSION and QR_EC_LEVEL == "M"
    assert 1250 <= len(full_card.text) <= 1420, len(full_card.text)
    assert len(full_card.payload) < 1300 and len(full_card.message) < 1400


def test_text_uses_only_the_alphanumeric_mode(full_card):
    from clinic.card.qrtext import BASE45_ALPHABET
    assert set(full_card.text) <= set(BASE45_ALPHABET)


def test_small_history_fits_a_small_code(small, clinic_key):
    w, p, e = small
    ct = make_card_text(w, p, e, key=clinic_key, issue=1, issued_at="2026-11-20T12:00:00Z")
    assert ct.qr_version <= 15


def test_over_the_limit_the_newest_entries_stay_and_the_blood_group_is_kept(full, clinic_key, trust):
    from clinic.card.codec import read_card
    w, p, e = full
    ct = make_card_text(w, p, e, key=clinic_key, issue=1, issued_at="2026-11-20T12:00:00Z", max_version=21)
    assert ct.omitted > 0 and qr_version_for(ct.text) <= 21
    r = read_card(ct.text, trust)
    kinds = [x["kind"] for x in r.content.entries]
    assert r.content.omitted == ct.omitted and "typing" in kinds and "birth" in kinds
    kept_screens = sorted(x["sampled_at"] for x in r.content.entries if x["kind"] == "screen")
    all_screens = sorted(x["sampled_at"] for x in e if x["kind"] == "screen")
    assert kept_screens == all_screens[len(all_screens) - len(kept_screens):]  # the newest ones
