"""A record belongs to the facility that made it: a card or bundle signed by another facility
never replaces or voids it. A changed copy on a card is not taken in (``not-owner``, kept in the
audit log attributed to the signer); a bundle carrying another facility's records is refused.

The clinic makes the history; the hospital takes it in from the clinic's card, changes two of
the clinic's entries (one amended to a higher version, one voided) and signs its own card and
bundle carrying them. The clinic and the district must keep the clinic's records unchanged."""
from __future__ import annotations

from datetime import datetime, timezone

import pytest

from clinic.card.codec import make_card_text, read_card
from clinic.card.importing import import_reading
from clinic.card.issue import issue_card
from clinic.config import load_settings
from clinic.records.values import utc_text
from clinic.reports.bundle import BundleRefused, encode_bundle, export_bundle, import_bundle, read_bundle
from clinic.signing.keys import load_signing_key
from clinic.signing.trust import load_trust
from clinic.store import Store
from tests.card.histories import full_history, put_in_store
from tests.card.world import make_world

CLINIC, HOSPITAL = "DEMO-CLINIC-NORTH", "DEMO-HOSPITAL"


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    w = make_world(tmp_path_factory.mktemp("owner"))
    d = w["dirs"]
    clinic, hospital = Store(d["clinic"]), Store(d["hospital"])
    history = full_history()
    put_in_store(clinic, history)
    pid = history[1]["id"]
    card = issue_card(d["clinic"], clinic, load_settings(d["clinic"]), pid)
    import_reading(hospital, read_card(card.card.text, load_trust(d["hospital"])), data_dir=d["hospital"])
    entries = hospital.entries(pid)
    dose = next(e for e in entries if e["kind"] == "dose")
    screen = [e for e in entries if e["kind"] == "screen"][-1]
    hospital.amend(dose["id"], {"lot": "CHANGED-AT-HOSPITAL"}, by="demo", reason="lot retyped")
    hospital.void(screen["id"], by="demo", reason="entered on the wrong woman")
    w.update(clinic=clinic, hospital=hospital, pid=pid, dose_id=dose["id"], voided_id=screen["id"])
    return w


def _clinic_copy(w) -> dict:
    """The clinic's own records, as it holds them (a fresh store on its folder)."""
    return {r["id"]: r for r in Store(w["dirs"]["clinic"]).iter_records()}


def _hospital_card(w):
    d = w["dirs"]
    return issue_card(d["hospital"], w["hospital"], load_settings(d["hospital"]), w["pid"])


def test_the_hospital_card_carries_the_clinic_records_changed(world):
    card = _hospital_card(world)
    reading = read_card(card.card.text, load_trust(world["dirs"]["clinic"]))
    assert reading.trust == "trusted" and reading.content.issuer_id == HOSPITAL
    carried = {e["id"]: e for e in reading.content.entries}
    assert carried[world["dose_id"]]["facility"] == CLINIC and carried[world["dose_id"]]["version"] == 2
    assert carried[world["voided_id"]]["voided"]


def test_a_card_cannot_amend_or_void_another_facility_record(world):
    before = _clinic_copy(world)
    reading = read_card(_hospital_card(world).card.text, load_trust(world["dirs"]["clinic"]))
    res = import_reading(world["clinic"], reading, data_dir=world["dirs"]["clinic"])
    assert res.outcomes[world["dose_id"]] == "not-owner"
    assert res.outcomes[world["voided_id"]] == "not-owner"
    after = _clinic_copy(world)
    assert after == before  # nothing replaced, nothing voided, nothing added
    assert after[world["dose_id"]]["lot"] != "CHANGED-AT-HOSPITAL" and after[world["dose_id"]]["version"] == 1
    assert not after[world["voided_id"]]["voided"]


def test_what_the_card_carried_is_kept_in_the_audit_log_attributed_to_its_signer(world):
    reading = read_card(_hospital_card(world).card.text, load_trust(world["dirs"]["clinic"]))
    import_reading(world["clinic"], reading, data_dir=world["dirs"]["clinic"])
    lines = [a for a in world["clinic"].audit(world["dose_id"]) if a["action"] == "import-declined"]
    assert lines and lines[-1]["signer"] == HOSPITAL and lines[-1]["facility"] == CLINIC
    assert lines[-1]["changes"]["lot"]["new"] == "CHANGED-AT-HOSPITAL"
    voids = [a for a in world["clinic"].audit(world["voided_id"]) if a["action"] == "import-declined"]
    assert voids and voids[-1]["changes"]["voided"] == {"old": False, "new": True}
    assert world["clinic"].check().ok


def test_a_forged_higher_version_signed_by_a_trusted_facility_is_not_taken_in(world):
    """A trusted key signs a card with the clinic's dose at version 9 and a new dose amount."""
    w, p, entries = world["hospital"].history(world["pid"])
    forged = [dict(e, version=9, amount=50, dose_iu=250) if e["id"] == world["dose_id"] else e for e in entries]
    text = make_card_text(w, p, forged, key=load_signing_key(world["dirs"]["hospital"]), issue=7,
                          issued_at=utc_text(datetime.now(timezone.utc))).text
    before = _clinic_copy(world)
    res = import_reading(world["clinic"], read_card(text, load_trust(world["dirs"]["clinic"])),
                         data_dir=world["dirs"]["clinic"])
    assert res.outcomes[world["dose_id"]] == "not-owner"
    assert _clinic_copy(world) == before


def test_a_third_facility_keeps_the_owner_copy_too(world, tmp_path):
    """A copy first carried in by another facility's card gives way to the owner's own card."""
    from tests.card.world import init, run

    third = init(tmp_path, "third", "DEMO-THIRD", "Third Demo Clinic", "clinic", "+000 555 0300")
    run("trust", "import", world["trust_file"], "--fingerprint", world["fingerprint"], "--data", third)
    store = Store(third)
    hospital_card = _hospital_card(world).card.text
    import_reading(store, read_card(hospital_card, load_trust(third)), data_dir=third)
    assert store.get(world["dose_id"])["lot"] == "CHANGED-AT-HOSPITAL"  # carried in: nothing else known yet
    d = world["dirs"]
    own = issue_card(d["clinic"], world["clinic"], load_settings(d["clinic"]), world["pid"]).card.text
    res = import_reading(store, read_card(own, load_trust(third)), data_dir=third)
    assert res.outcomes[world["dose_id"]] == "updated"
    mine = world["clinic"].get(world["dose_id"])
    assert store.get(world["dose_id"])["lot"] == mine["lot"]
    assert not store.get(world["voided_id"])["voided"]
    again = import_reading(store, read_card(hospital_card, load_trust(third)), data_dir=third)
    assert again.outcomes[world["dose_id"]] == "not-owner"
    assert store.get(world["dose_id"])["lot"] == mine["lot"]


def _district(world):
    return world["dirs"]["district"], Store(world["dirs"]["district"])


@pytest.mark.parametrize("change", ["higher-version", "voided"])
def test_the_district_refuses_a_bundle_carrying_another_facility_record(world, change):
    d = world["dirs"]
    clinic_trust = load_trust(d["clinic"])
    own = export_bundle(world["clinic"], d["clinic"], facility=CLINIC, since="1900-01-01")
    district_dir, district = _district(world)
    assert import_bundle(district, district_dir, own.path.read_bytes(), name="clinic.rhlb",
                         trust=clinic_trust).status == "imported"
    before = {r["id"]: r for r in district.iter_records()}
    target = world["dose_id"] if change == "higher-version" else world["voided_id"]
    rec = world["hospital"].get(target)
    assert rec["facility"] == CLINIC and rec["version"] == 2
    data = encode_bundle([rec], key=load_signing_key(d["hospital"]), facility=HOSPITAL, since=None,
                         until="2026-11-20T12:00:00Z", made_at="2026-11-20T12:00:00Z")
    with pytest.raises(BundleRefused, match="belong to another facility"):
        read_bundle(data, clinic_trust)
    res = import_bundle(district, district_dir, data, name="hospital.rhlb", trust=clinic_trust)
    assert res.status == "refused" and res.reason == "not-owner"
    assert {r["id"]: r for r in Store(district_dir).iter_records()} == before


def test_a_facility_bundle_carries_only_its_own_records(world, tmp_path):
    d = world["dirs"]
    res = export_bundle(world["hospital"], d["hospital"], facility=HOSPITAL, out=tmp_path / "h.rhlb",
                        since="1900-01-01")
    b = read_bundle(res.path.read_bytes(), load_trust(d["clinic"]))
    assert {r["facility"] for r in b.records} <= {HOSPITAL}
    assert world["dose_id"] not in {r["id"] for r in b.records}
