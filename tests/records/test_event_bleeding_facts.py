"""The event record asks what the guidelines ask about early bleeding (BSH 2014, Qureshi et al.,
Transfus Med 24:8-20, key recommendations: bleeding that is repeated, heavy or with abdominal
pain; threatened miscarriage as an event of its own): three yes/no facts beside "bleeding
continues", each validated as yes/no and always asked on the form."""
import pytest

from clinic.card import payload
from clinic.records.choices import event_words
from clinic.records.schema import EVENT_KINDS, KINDS
from clinic.records.validate import ValidationError, validate_record
from tests.records.helpers import NOW, TZ, valid

FACTS = ("bleeding_heavy", "bleeding_repeated", "abdominal_pain")


def test_threatened_miscarriage_is_an_event_kind_added_at_the_end():
    # appended: the card's frozen choice table gives each kind its position
    assert EVENT_KINDS[-1] == "threatened-miscarriage"
    assert payload.CHOICES["event"][-1] == "threatened-miscarriage"
    assert payload.CHOICES["event"] == EVENT_KINDS
    assert event_words("threatened-miscarriage") == "threatened miscarriage"


def test_the_three_facts_are_separate_yes_no_fields_asked_on_the_form():
    spec = KINDS["event"]
    for name in FACTS:
        f = spec.field(name)
        assert f.type == "bool" and f.unticked_is_no and not f.required
    assert not spec.field("ongoing").unticked_is_no       # "bleeding continues": its own question
    labels = {spec.field(n).label for n in FACTS + ("ongoing",)}
    assert len(labels) == 4


@pytest.mark.parametrize("raw, stored", [("yes", True), ("no", False), (True, True), ("0", False)])
def test_facts_are_validated_as_yes_or_no(raw, stored):
    rec = validate_record("event", valid("event", event_kind="threatened-miscarriage", ga_days="9+2",
                                         bleeding_heavy=raw), now=NOW, tz=TZ)
    assert rec["bleeding_heavy"] is stored and "bleeding_repeated" not in rec


def test_a_fact_that_is_not_yes_or_no_names_the_field():
    with pytest.raises(ValidationError) as e:
        validate_record("event", valid("event", abdominal_pain="a little"), now=NOW, tz=TZ)
    assert e.value.errors == {"abdominal_pain": "must be yes or no"}


def test_the_card_carries_the_facts_appended_at_the_end():
    assert payload.CARD_FIELDS["event"][:5] == ("event_kind", "occurred_at", "ga_days", "ongoing", "notes")
    assert payload.CARD_FIELDS["event"][5:] == FACTS
