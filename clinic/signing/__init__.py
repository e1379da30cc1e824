"""Facility Ed25519 keys, the district trust list, and COSE_Sign1 signing and checking.

- ``keys``: ``ensure_facility_key``, ``load_signing_key``, ``rotate_facility_key``
- ``trust``: ``TrustList`` (``TrustList.verify``: a signed message against the list),
  ``load_trust``, ``build_trust_list``, ``import_trust_list``
- ``cose``: ``sign1``, ``parse1``, ``verify_with_public`` (RFC 9052 COSE_Sign1, EdDSA / Ed25519);
  it knows keys only, never the trust list

Depends on nothing of ours except ``clinic.config`` (the facility's name for its own entry).
"""
from clinic.signing.errors import CoseFormatError, DistrictKeyUnconfirmed, KeyStoreError, SigningError, TrustListError

__all__ = ["CoseFormatError", "DistrictKeyUnconfirmed", "KeyStoreError", "SigningError", "TrustListError"]
