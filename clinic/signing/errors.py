"""Exceptions of the signing package, each named for what went wrong."""
from __future__ import annotations


class SigningError(Exception):
    """Base of every error raised by clinic.signing."""


class KeyStoreError(SigningError):
    """The facility key files are missing, unreadable, or belong to another facility."""


class CoseFormatError(SigningError):
    """Bytes that are not a COSE_Sign1 message this installation can check."""


class TrustListError(SigningError):
    """A trust list that cannot be built, read or imported; the message says why."""


class DistrictKeyUnconfirmed(TrustListError):
    """First import of a trust list: the district key's fingerprint must be confirmed."""

    def __init__(self, fingerprint: str, district_id: str):
        self.fingerprint = fingerprint
        self.district_id = district_id
        super().__init__(
            f"this is the first trust list imported here; it is signed by district {district_id} "
            f"with the key whose fingerprint is {fingerprint}. Confirm this fingerprint with the "
            f"district officer (by phone or in person), then import again giving it "
            f"(--fingerprint \"{fingerprint}\")")
