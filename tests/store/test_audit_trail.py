"""Every create, amend, void and import appears in the audit trail: who, when, which record, what changed."""
from __future__ import annotations

from datetime import timedelta

from tests.conftest import FACILITY_ID, USERNAME


def test_every_change_is_in_the_audit_trail(store, woman, pregnancy, now):
    later = now + timedelta(hours=1)
    store.amend(woman["id"], {"village": "Lower Ridge"}, by="clerk2", reason="moved", now=later)
    store.void(pregnancy["id"], by="clerk3", reason="booked twice", now=later + timedelta(minutes=1))
    lines = store.audit()
    assert [(a["action"], a["id"]) for a in lines] == [
        ("create", woman["id"]), ("create", pregnancy["id"]), ("amend", woman["id"]), ("void", pregnancy["id"])]
    create = lines[0]
    assert create["by"] == USERNAME and create["at"] == "2026-03-16T09:30:00Z" and create["kind"] == "woman"
    assert create["changes"]["name"] == {"old": None, "new": "Amina Test Wanjiru"}
    amend = lines[2]
    assert amend["by"] == "clerk2" and amend["reason"] == "moved" and amend["version"] == 2
    assert amend["changes"] == {"village": {"old": "Upper Ridge", "new": "Lower Ridge"}}
    assert lines[3]["changes"]["voided"] == {"old": False, "new": True}


def test_audit_filters_by_record_and_time(store, woman, pregnancy, now):
    store.amend(woman["id"], {"village": "X"}, by=USERNAME, reason="r", now=now + timedelta(days=40))
    assert [a["action"] for a in store.audit(woman["id"])] == ["create", "amend"]
    assert [a["id"] for a in store.audit(since="2026-04-01T00:00:00Z")] == [woman["id"]]


def test_imports_are_audited(store, woman, now):
    foreign = dict(store.get(woman["id"]))
    foreign.update(id="f-woman-1", facility="other-clinic", origin={"via": "card", "facility": "other-clinic"})
    assert store.merge_foreign(foreign) == "created"
    (line,) = store.audit("f-woman-1")
    assert line["action"] == "import-create" and line["origin"]["via"] == "card"


def test_audit_lines_are_appended_not_rewritten(store, woman, data_dir, now):
    (path,) = (data_dir / "audit" / FACILITY_ID).glob("*.jsonl")
    first = path.read_bytes()
    store.amend(woman["id"], {"village": "Y"}, by=USERNAME, reason="r", now=now)
    assert path.read_bytes().startswith(first) and len(path.read_bytes()) > len(first)


def test_a_torn_last_audit_line_is_ignored_and_trimmed(store, woman, data_dir, now):
    (path,) = (data_dir / "audit" / FACILITY_ID).glob("*.jsonl")
    with open(path, "ab") as fh:
        fh.write(b'{"at": "2026-03-16T09:3')  # a crash mid-append
    assert len(store.audit()) == 1
    store.amend(woman["id"], {"village": "Z"}, by=USERNAME, reason="r", now=now)
    assert [a["action"] for a in store.audit()] == ["create", "amend"]
