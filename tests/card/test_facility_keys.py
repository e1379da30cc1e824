"""Facility keys: made once, private file 0600, never exported, rotation keeps old cards verifiable."""
from __future__ import annotations

import json
import os
import stat

import pytest

from clinic.signing.cose import sign1
from clinic.signing.errors import KeyStoreError
from clinic.signing.keys import (
    ensure_facility_key,
    fingerprint_of,
    load_signing_key,
    normalise_fingerprint,
    rotate_facility_key,
)
from clinic.signing.trust import load_trust


def test_private_key_file_is_mode_0600_and_folder_0700(tmp_path):
    ensure_facility_key(tmp_path, "DEMO-CLINIC-A")
    pem = tmp_path / "keys" / "facility-ed25519.pem"
    assert stat.S_IMODE(pem.stat().st_mode) == 0o600
    assert stat.S_IMODE((tmp_path / "keys").stat().st_mode) == 0o700


def test_ensure_is_idempotent(tmp_path):
    a = ensure_facility_key(tmp_path, "DEMO-CLINIC-A")
    b = ensure_facility_key(tmp_path, "DEMO-CLINIC-A")
    assert a == b
    assert len(a.kid) == 8 and len(a.fingerprint) == 24


def test_seeded_key_is_deterministic_per_facility(tmp_path):
    a = ensure_facility_key(tmp_path / "a", "DEMO-CLINIC-A", seed=b"demo-seed-0123456789")
    b = ensure_facility_key(tmp_path / "b", "DEMO-CLINIC-A", seed=b"demo-seed-0123456789")
    c = ensure_facility_key(tmp_path / "c", "DEMO-CLINIC-B", seed=b"demo-seed-0123456789")
    assert a.public_key_b64 == b.public_key_b64 != c.public_key_b64


def test_other_facility_in_same_folder_is_refused(tmp_path):
    ensure_facility_key(tmp_path, "DEMO-CLINIC-A")
    with pytest.raises(KeyStoreError, match="belongs to facility DEMO-CLINIC-A"):
        ensure_facility_key(tmp_path, "DEMO-CLINIC-B")


def test_private_key_is_never_in_public_files_or_repr(tmp_path):
    info = ensure_facility_key(tmp_path, "DEMO-CLINIC-A")
    key = load_signing_key(tmp_path)
    pem = (tmp_path / "keys" / "facility-ed25519.pem").read_text()
    body = "".join(pem.splitlines()[1:-1])
    public_doc = (tmp_path / "keys" / "facility.json").read_text()
    assert body not in public_doc and body not in repr(key) and body not in repr(info)
    assert set(json.loads(public_doc)) == {"facility_id", "kid", "key", "fingerprint", "valid_from", "valid_to"}


def test_loose_permissions_are_refused_with_the_fix(tmp_path):
    ensure_facility_key(tmp_path, "DEMO-CLINIC-A")
    os.chmod(tmp_path / "keys" / "facility-ed25519.pem", 0o644)
    with pytest.raises(KeyStoreError, match="chmod 600"):
        load_signing_key(tmp_path)


def test_missing_key_says_to_run_init(tmp_path):
    with pytest.raises(KeyStoreError, match="rhledger init"):
        load_signing_key(tmp_path)


def test_rotation_keeps_old_signatures_verifiable(tmp_path):
    ensure_facility_key(tmp_path, "DEMO-CLINIC-A")
    old = load_signing_key(tmp_path)
    message = sign1(b"issued before rotation", old)
    new_info = rotate_facility_key(tmp_path)
    new = load_signing_key(tmp_path)
    assert new.kid != old.kid and new_info.kid == new.kid
    assert (tmp_path / "keys" / "retired" / f"{old.kid.hex()}.json").exists()
    trust = load_trust(tmp_path)
    assert trust.verify(message).state == "trusted"
    assert trust.verify(sign1(b"after", new)).state == "trusted"
    # The retired key is accepted only up to its end date.
    assert trust.verify(message, on_date="2999-01-01").state == "unknown-issuer"


def test_fingerprint_typed_loosely_normalises():
    fp = fingerprint_of(bytes(32))
    assert normalise_fingerprint(fp.lower().replace(" ", "-")) == fp
