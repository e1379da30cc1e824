"""Envelope checks (clinic.records.envelope): each bad envelope field is named, and the module
needs no storage."""
import subprocess
import sys

import pytest

from clinic.records import envelope
from clinic.records.validate import ValidationError
from tests.conftest import NOW

RECORD = {"id": "t-1", "kind": "typing", "facility": "far-clinic", "woman_id": "w-1", "pregnancy_id": "p-1",
          "created_at": "2026-03-02T08:00:00Z", "created_by": "midwife", "amended_at": None, "amended_by": None,
          "version": 1, "amendments": [], "origin": {"via": "bundle", "facility": "far-clinic", "extra": 1},
          "schema": 1, "abo": "A", "rhd": "negative", "tested_on": "2026-03-02"}


def test_envelope_checks_import_no_storage():
    code = ("import sys, clinic.records.envelope\n"
            "print(','.join(m for m in sys.modules if m.split('.')[0] in ('flask', 'tinydb', 'filelock')"
            " or m.startswith(('clinic.store', 'clinic.web'))))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_a_foreign_record_comes_back_canonical_with_its_origin_trimmed():
    out = envelope.foreign_record(dict(RECORD), "typing", {}, now=NOW, tz=NOW.tzinfo, schema=1)
    assert out["origin"] == {"via": "bundle", "facility": "far-clinic"}
    assert out["voided"] is False and out["rhd"] == "negative"


def test_every_bad_envelope_field_is_named_at_once():
    bad = dict(RECORD, id="../x", facility="far clinic", version=0, created_at="yesterday",
               pregnancy_id=None, origin={"via": "fax"}, colour="blue")
    with pytest.raises(ValidationError) as e:
        envelope.foreign_record(bad, "typing", {}, now=NOW, tz=NOW.tzinfo, schema=1)
    assert set(e.value.errors) == {"id", "facility", "version", "created_at", "pregnancy_id", "origin", "colour"}


def test_new_record_parents_and_people():
    errors: dict[str, str] = {}
    assert envelope.check_by("  ana ", errors) == "ana"
    envelope.check_parents("typing", None, None, errors)
    envelope.check_parents("stock", "w-1", None, errors)
    envelope.check_reason("x" * 501, errors)
    assert set(errors) == {"pregnancy_id", "woman_id", "reason"}
    assert "500" in errors["reason"]
