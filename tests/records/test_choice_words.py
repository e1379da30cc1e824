"""The words shown for stored choice values live once, beside the schema (clinic/records/choices.py)."""
from clinic.records.choices import WORD_TABLES, event_words, plain_words


def test_every_value_of_a_worded_choice_list_has_its_words():
    for values, words in WORD_TABLES:
        missing = [v for v in values if v not in words]
        assert missing == []


def test_plain_words():
    assert plain_words("weak-d") == "weak D"
    assert plain_words("kleihauer-betke") == "Kleihauer-Betke"
    assert plain_words("ug") == "µg"
    assert plain_words("anti-c") == "anti-c"
    assert plain_words("cold-chain-break") == "cold chain break"
    assert plain_words(32) == "32"


def test_event_words_read_in_a_sentence():
    assert event_words("antepartum-haemorrhage") == "antepartum haemorrhage"
    assert event_words("external-cephalic-version").capitalize() == "External cephalic version"
