"""An antibody titre is a doubling dilution, 1:1 to 1:4096.

Titres are read from a doubling-dilution series (1, 2, 4, 8 ... ); BSH guideline for blood grouping
and red cell antibody testing in pregnancy, White et al., Transfusion Medicine 2016;26:246-263
(from memory). The upper end 1:4096 is the schema's bound (common practice).
"""
from __future__ import annotations

import pytest

from clinic.records.validate import ValidationError, validate_record
from tests.records.helpers import NOW, TZ, valid


@pytest.mark.parametrize("titre", [3, 48, 100, 0, 8192, "1:3", True])
def test_titre_not_a_doubling_dilution_is_refused(titre):
    with pytest.raises(ValidationError) as e:
        validate_record("screen", valid("screen", titre=titre), now=NOW, tz=TZ)
    assert "titre" in e.value.errors and "not one of" in e.value.errors["titre"]


@pytest.mark.parametrize("titre", [1, 2, 16, "32", 4096])
def test_doubling_dilutions_are_accepted(titre):
    assert validate_record("screen", valid("screen", titre=titre), now=NOW, tz=TZ)["titre"] == int(titre)


def test_titre_on_a_negative_screen_is_refused():
    with pytest.raises(ValidationError) as e:
        validate_record("screen", valid("screen", result="negative", antibodies=None, titre_antibody=None),
                        now=NOW, tz=TZ)
    assert "titre" in e.value.errors


def test_titre_for_an_antibody_not_identified_is_refused():
    with pytest.raises(ValidationError) as e:
        validate_record("screen", valid("screen", titre_antibody="anti-K"), now=NOW, tz=TZ)
    assert "titre_antibody" in e.value.errors
