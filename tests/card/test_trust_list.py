"""The district trust list: fingerprint confirmed on first import, pinned after, never rolled back."""
from __future__ import annotations

from datetime import date

import pytest

from clinic.signing.cose import sign1
from clinic.signing.errors import DistrictKeyUnconfirmed, TrustListError
from clinic.signing.keys import ensure_facility_key, load_signing_key, rotate_facility_key
from clinic.signing.trust import build_trust_list, import_trust_list, load_trust, own_entry


@pytest.fixture()
def world(tmp_path):
    """A district, a clinic and a hospital, each with its own data folder."""
    dirs = {n: tmp_path / n for n in ("district", "clinic", "hospital")}
    infos = {n: ensure_facility_key(d, f"DEMO-{n.upper()}") for n, d in dirs.items()}
    return dirs, infos


def facilities(infos, **extra):
    out = [{"facility_id": "DEMO-CLINIC", "name": "Demo Clinic", "kind": "clinic", "phone": "+000 555 0100",
            "keys": [{"key": infos["clinic"].public_key_b64, "valid_from": "2026-01-01"}]},
           {"facility_id": "DEMO-HOSPITAL", "name": "Demo Hospital", "kind": "hospital",
            "keys": [{"key": infos["hospital"].public_key_b64}]}]
    return out


def build(dirs, infos, seq=1, entries=None):
    return build_trust_list(entries or facilities(infos), load_signing_key(dirs["district"]),
                            district_name="Demo District", seq=seq, issued=date(2026, 11, 1))


def test_first_import_needs_the_fingerprint(world):
    dirs, infos = world
    data = build(dirs, infos)
    with pytest.raises(DistrictKeyUnconfirmed) as e:
        import_trust_list(dirs["hospital"], data)
    assert e.value.fingerprint == infos["district"].fingerprint
    assert infos["district"].fingerprint in str(e.value)
    with pytest.raises(TrustListError, match="do not import it"):
        import_trust_list(dirs["hospital"], data, expected_fingerprint="0000 0000 0000 0000 0000")
    got = import_trust_list(dirs["hospital"], data, expected_fingerprint=infos["district"].fingerprint)
    assert got.first_time and got.facilities == 3 and got.district_id == "DEMO-DISTRICT"


def test_imported_list_makes_the_clinic_trusted_at_the_hospital(world):
    dirs, infos = world
    import_trust_list(dirs["hospital"], build(dirs, infos), expected_fingerprint=infos["district"].fingerprint)
    message = sign1(b"card", load_signing_key(dirs["clinic"]))
    trust = load_trust(dirs["hospital"])
    v = trust.verify(message, on_date="2026-11-20")
    assert v.state == "trusted" and v.entry.name == "Demo Clinic" and v.entry.phone == "+000 555 0100"
    # Before the key's valid_from it is not accepted.
    assert trust.verify(message, on_date="2025-12-31").state == "unknown-issuer"
    assert trust.lookup(infos["clinic"].kid, "2026-11-20").facility_id == "DEMO-CLINIC"
    assert trust.lookup(infos["clinic"].kid, "2025-01-01") is None


def test_without_a_list_only_the_own_key_is_trusted(world):
    dirs, infos = world
    trust = load_trust(dirs["hospital"])
    assert [e.facility_id for e in trust.entries] == ["DEMO-HOSPITAL"]
    assert trust.verify(sign1(b"x", load_signing_key(dirs["clinic"]))).state == "unknown-issuer"


def test_later_list_must_come_from_the_pinned_key_and_be_newer(world, tmp_path):
    dirs, infos = world
    fp = infos["district"].fingerprint
    import_trust_list(dirs["hospital"], build(dirs, infos, seq=5), expected_fingerprint=fp)
    assert import_trust_list(dirs["hospital"], build(dirs, infos, seq=5)).unchanged  # same list again
    with pytest.raises(TrustListError, match="older"):
        import_trust_list(dirs["hospital"], build(dirs, infos, seq=4))
    assert not import_trust_list(dirs["hospital"], build(dirs, infos, seq=6)).first_time
    # Another "district" with the same ID but a different key is refused.
    impostor = tmp_path / "impostor"
    ensure_facility_key(impostor, "DEMO-DISTRICT")
    forged = build_trust_list(facilities(infos), load_signing_key(impostor), seq=99)
    with pytest.raises(TrustListError, match="does not hold"):
        import_trust_list(dirs["hospital"], forged)


def test_district_key_rotation_is_followed(world):
    dirs, infos = world
    import_trust_list(dirs["hospital"], build(dirs, infos, seq=1), expected_fingerprint=infos["district"].fingerprint)
    old = load_signing_key(dirs["district"])
    new_info = rotate_facility_key(dirs["district"], today=date(2026, 11, 2))
    new = load_signing_key(dirs["district"])
    # Step 1: the old key signs a list announcing the new one.
    announce = facilities(infos) + [{"facility_id": "DEMO-DISTRICT", "kind": "district", "name": "Demo District",
                                     "keys": [{"key": old.public_key_b64}, {"key": new_info.public_key_b64}]}]
    import_trust_list(dirs["hospital"], build_trust_list(announce, old, seq=2, issued=date(2026, 11, 2)))
    # Step 2: lists signed by the new key are accepted.
    got = import_trust_list(dirs["hospital"], build_trust_list(announce, new, seq=3, issued=date(2026, 11, 3)))
    assert got.fingerprint == new.fingerprint


def test_tampered_list_is_refused(world):
    dirs, infos = world
    data = bytearray(build(dirs, infos))
    data[40] ^= 0x01
    with pytest.raises(TrustListError):
        import_trust_list(dirs["hospital"], bytes(data), expected_fingerprint=infos["district"].fingerprint)
    with pytest.raises(TrustListError, match="not a signed trust list"):
        import_trust_list(dirs["hospital"], b"hello", expected_fingerprint=infos["district"].fingerprint)


def test_replaced_stored_list_is_detected(world):
    dirs, infos = world
    import_trust_list(dirs["hospital"], build(dirs, infos), expected_fingerprint=infos["district"].fingerprint)
    other = dirs["hospital"].parent / "other"
    ensure_facility_key(other, "DEMO-DISTRICT")
    (dirs["hospital"] / "trust" / "trust-list.cose").write_bytes(
        build_trust_list(facilities(infos), load_signing_key(other), seq=9))
    with pytest.raises(TrustListError, match="pinned district key"):
        load_trust(dirs["hospital"])


@pytest.mark.parametrize("bad, message", [
    ({"facility_id": "X", "kind": "shop", "keys": [{"key": "AAAA"}]}, "kind"),
    ({"facility_id": "X", "keys": []}, "no public keys"),
    ({"facility_id": "X", "keys": [{"key": "not base64!"}]}, "base64"),
    ({"facility_id": "X", "keys": [{"key": "AAAA"}]}, "32 bytes"),
    ({"name": "no id", "keys": [{"key": "AAAA"}]}, "no facility_id"),
])
def test_bad_facility_entries_are_named(world, bad, message):
    dirs, infos = world
    with pytest.raises(TrustListError, match=message):
        build(dirs, infos, entries=[bad])


def test_validity_dates_are_checked(world):
    dirs, infos = world
    bad = [{"facility_id": "X", "keys": [{"key": infos["clinic"].public_key_b64, "valid_from": "2026-05-01",
                                          "valid_to": "2026-01-01"}]}]
    with pytest.raises(TrustListError, match="before valid_from"):
        build(dirs, infos, entries=bad)


def test_own_entry_carries_retired_keys(world):
    dirs, infos = world
    rotate_facility_key(dirs["clinic"], today=date(2026, 11, 10))
    entry = own_entry(dirs["clinic"])
    assert len(entry.keys) == 2 and entry.keys[0].valid_to == date(2026, 11, 10)
