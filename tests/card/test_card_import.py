"""Taking a card in at the hospital: created once, never duplicated, never overwriting a
newer local entry, with the origin recorded; then the hospital's care engine plans from it."""
from __future__ import annotations

import json

import pytest

from clinic.card.codec import read_card
from clinic.card.importing import CardImportError, PossibleDuplicate, import_reading
from clinic.card.issue import issue_card
from clinic.config import load_settings
from clinic.signing.trust import load_trust
from clinic.store import Store
from tests.card.histories import full_history, put_in_store
from tests.card.world import make_world


@pytest.fixture()
def world(tmp_path):
    w = make_world(tmp_path)
    d = w["dirs"]
    clinic = Store(d["clinic"])
    history = full_history()
    put_in_store(clinic, history)
    w["history"] = history
    w["clinic"] = clinic
    w["hospital"] = Store(d["hospital"])
    return w


def card_at_clinic(w):
    d = w["dirs"]
    return issue_card(d["clinic"], w["clinic"], load_settings(d["clinic"]), w["history"][1]["id"])


def read_at_hospital(w, text):
    return read_card(text, load_trust(w["dirs"]["hospital"]))


def test_new_pregnancy_is_created_with_origin_and_logged(world):
    ic = card_at_clinic(world)
    r = read_at_hospital(world, ic.card.text)
    res = import_reading(world["hospital"], r, data_dir=world["dirs"]["hospital"])
    assert res.counts == {"created": 15}
    preg = world["hospital"].get(world["history"][1]["id"])
    assert preg["origin"] == {"via": "card", "facility": "DEMO-CLINIC-NORTH", "issue": ic.issue}
    dose = [x for x in world["hospital"].entries(preg["id"]) if x["kind"] == "dose"][0]
    assert dose["dose_iu"] in (500, 1250, 1500) and dose["origin"]["via"] == "card"
    log = (world["dirs"]["hospital"] / "cards" / "imported.jsonl").read_text().splitlines()
    assert json.loads(log[-1])["card_code"] == ic.card.code


def test_importing_twice_changes_nothing(world):
    text = card_at_clinic(world).card.text
    import_reading(world["hospital"], read_at_hospital(world, text), data_dir=world["dirs"]["hospital"])
    again = import_reading(world["hospital"], read_at_hospital(world, text), data_dir=world["dirs"]["hospital"])
    assert again.counts == {"unchanged": 15}
    assert len(world["hospital"].pregnancies()) == 1 and len(world["hospital"].women_of()) == 1


def test_a_newer_local_entry_is_never_overwritten(world):
    text = card_at_clinic(world).card.text
    hosp = world["hospital"]
    import_reading(hosp, read_at_hospital(world, text), data_dir=world["dirs"]["hospital"])
    screen = [x for x in world["history"][2] if x["kind"] == "screen"][-1]
    hosp.amend(screen["id"], {"lab": "Demo Hospital Laboratory"}, by="demo", reason="lab name corrected")
    res = import_reading(hosp, read_at_hospital(world, text), data_dir=world["dirs"]["hospital"])
    assert res.outcomes[screen["id"]] == "kept-local"
    assert hosp.get(screen["id"])["lab"] == "Demo Hospital Laboratory"


def test_a_newer_card_updates_and_adds(world):
    d = world["dirs"]
    hosp = world["hospital"]
    import_reading(hosp, read_at_hospital(world, card_at_clinic(world).card.text), data_dir=d["hospital"])
    screen = [x for x in world["history"][2] if x["kind"] == "screen"][-1]
    world["clinic"].amend(screen["id"], {"titre": 64}, by="demo", reason="titre re-read")
    ic2 = card_at_clinic(world)
    assert ic2.issue == 2
    res = import_reading(hosp, read_at_hospital(world, ic2.card.text), data_dir=d["hospital"])
    assert res.outcomes[screen["id"]] == "updated" and hosp.get(screen["id"])["titre"] == 64


def test_duplicate_check_by_name_and_birth_date(world):
    d = world["dirs"]
    hosp = world["hospital"]
    local = hosp.create("woman", {"name": "Mara Kellin Ostrova", "birth_date": "1994-03-17"}, by="demo",
                        facility="DEMO-HOSPITAL").record
    r = read_at_hospital(world, card_at_clinic(world).card.text)
    with pytest.raises(PossibleDuplicate) as e:
        import_reading(hosp, r, data_dir=d["hospital"])
    assert e.value.candidates[0]["id"] == local["id"] and "--woman" in str(e.value)
    res = import_reading(hosp, r, data_dir=d["hospital"], woman_id=local["id"])
    assert res.linked_to == local["id"] and hosp.get(world["history"][1]["id"])["woman_id"] == local["id"]
    assert len(hosp.women_of()) == 1


def test_altered_and_unknown_cards_are_refused(world, tmp_path):
    text = card_at_clinic(world).card.text
    broken = text[:40] + ("A" if text[40] != "A" else "B") + text[41:]
    r = read_at_hospital(world, broken)
    assert r.trust != "trusted"
    with pytest.raises(CardImportError):
        import_reading(world["hospital"], r, data_dir=world["dirs"]["hospital"])
    stranger = read_card(text, load_trust(tmp_path / "nowhere"))
    assert stranger.trust == "unknown-issuer"
    with pytest.raises(CardImportError, match="trust list"):
        import_reading(world["hospital"], stranger, data_dir=world["dirs"]["hospital"])


def test_hospital_plans_from_the_imported_history(world):
    from clinic.card.issue import plan_dict
    d = world["dirs"]
    import_reading(world["hospital"], read_at_hospital(world, card_at_clinic(world).card.text), data_dir=d["hospital"])
    w, p, e = world["hospital"].history(world["history"][1]["id"])
    plan = plan_dict(w, p, e, load_settings(d["hospital"]), __import__("datetime").datetime.now(
        __import__("datetime").timezone.utc))
    assert plan["rhd"]["recorded"] == "negative" and any(a["origin"] == "immune" for a in plan["antibodies"])


def test_issue_numbers_count_up_and_reprint_without_change_is_the_same_issue(world):
    a = card_at_clinic(world)
    b = card_at_clinic(world)
    assert (a.issue, b.issue, b.reused, b.card.text) == (1, 1, True, a.card.text)
    lines = (world["dirs"]["clinic"] / "cards" / "issued.jsonl").read_text().splitlines()
    assert len(lines) == 1 and json.loads(lines[0])["sha256"] == a.card.payload_hash


def test_hospital_card_after_import_continues_the_issue_number(world):
    d = world["dirs"]
    hosp = world["hospital"]
    import_reading(hosp, read_at_hospital(world, card_at_clinic(world).card.text), data_dir=d["hospital"])
    ic = issue_card(d["hospital"], hosp, load_settings(d["hospital"]), world["history"][1]["id"])
    assert ic.issue == 2
    back_home = read_card(ic.card.text, load_trust(d["clinic"]))
    assert back_home.trust == "trusted" and back_home.content.issuer_id == "DEMO-HOSPITAL"
    res = import_reading(world["clinic"], back_home, data_dir=d["clinic"])
    assert set(res.counts) == {"unchanged"}
