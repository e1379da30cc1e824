"""Fixtures for the card tests: invented facilities with keys made from fixed seeds."""
from __future__ import annotations

import pytest

from clinic.signing.keys import SigningKey
from clinic.signing.trust import TrustEntry, TrustKey, TrustList
from tests.card.histories import CLINIC, full_history, small_history

CLINIC_NAME = "North Demo Clinic"
CLINIC_PHONE = "+000 555 0100"


@pytest.fixture(scope="session")
def clinic_key() -> SigningKey:
    return SigningKey.from_seed(CLINIC, b"card-tests-clinic-seed-0001")


@pytest.fixture(scope="session")
def trust(clinic_key) -> TrustList:
    return TrustList([TrustEntry(CLINIC, CLINIC_NAME, "clinic", CLINIC_PHONE, (TrustKey(clinic_key.public_raw),))])


@pytest.fixture()
def full():
    return full_history()


@pytest.fixture()
def small():
    return small_history()


@pytest.fixture(scope="session")
def full_card(clinic_key):
    from clinic.card.codec import make_card_text
    w, p, e = full_history()
    return make_card_text(w, p, e, key=clinic_key, issue=3, issued_at="2026-11-20T12:00:00Z",
                          issuer_name=CLINIC_NAME, issuer_phone=CLINIC_PHONE)
