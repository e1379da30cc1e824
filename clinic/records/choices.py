"""The words people read for stored choice values (schema.py keeps the values themselves).

A stored value never changes (``antepartum-haemorrhage``, ``weak-d``); what a page, a card or a
plan title shows for it is here, once:

- ``plain_words(value)``: the value in plain words, where a label beside it says what it is
  (the record pages and forms: "RhD: weak D", "Method: Kleihauer-Betke");
- ``EVENT_WORDS``: a sensitising event in words, lower case for the middle of a sentence
  ("Anti-D after antepartum haemorrhage"; capitalised to start a line on the card);
- ``RHD_WORDS``, ``FETAL_RHD_WORDS``, ``DAT_WORDS``, ``INDICATION_WORDS``: the short phrases
  the patient-held card prints without a label ("RhD negative", "DAT positive", "after birth").
"""
from __future__ import annotations

from typing import Final

from clinic.records.schema import (
    BABY_RHD,
    DAT,
    EVENT_KINDS,
    FETAL_RHD,
    INDICATIONS,
    PARTNER_RHD,
    RHD,
)

# Values whose plain words are not simply the value with its hyphens as spaces.
_SPECIAL: Final = {"ug": "µg", "kleihauer-betke": "Kleihauer-Betke", "large-fmh": "large FMH", "weak-d": "weak D",
                   "partial-d": "partial D", "flow-cytometry": "flow cytometry"}


def plain_words(value: object) -> str:
    """A stored choice value in plain words: antibody names (``anti-c``) stay as they are."""
    text = str(value)
    if text in _SPECIAL:
        return _SPECIAL[text]
    if text.startswith("anti-"):
        return text
    return text.replace("-", " ")


EVENT_WORDS: Final[dict[str, str]] = {
    "miscarriage": "miscarriage",
    "termination": "termination",
    "ectopic": "ectopic",
    "molar-pregnancy": "molar pregnancy",
    "antepartum-haemorrhage": "antepartum haemorrhage",
    "abdominal-trauma": "abdominal trauma",
    "external-cephalic-version": "external cephalic version",
    "amniocentesis": "amniocentesis",
    "chorionic-villus-sampling": "chorionic villus sampling",
    "fetal-blood-sampling": "fetal blood sampling",
    "intrauterine-death": "intrauterine death",
    "other": "other",
    "threatened-miscarriage": "threatened miscarriage",
}


def event_words(event_kind: str) -> str:
    """A sensitising event's kind in words, lower case ("antepartum haemorrhage"); ``.capitalize()``
    it to start a line."""
    return EVENT_WORDS.get(event_kind, event_kind.replace("-", " "))


# The mother's, the father's and the baby's RhD (and the engine's managed_as), as the card prints them.
RHD_WORDS: Final[dict[str, str]] = {"positive": "RhD positive", "negative": "RhD negative", "weak-d": "weak D",
                                    "partial-d": "partial D", "inconclusive": "RhD inconclusive",
                                    "unknown": "RhD not known", "not-tested": "RhD not tested"}
FETAL_RHD_WORDS: Final[dict[str, str]] = {"positive": "RHD positive", "negative": "RHD negative",
                                          "inconclusive": "inconclusive"}
DAT_WORDS: Final[dict[str, str]] = {"positive": "DAT positive", "negative": "DAT negative", "not-done": "DAT not done"}
DAT_NOT_RECORDED: Final = "DAT not recorded"
INDICATION_WORDS: Final[dict[str, str]] = {"routine-antenatal": "routine", "sensitising-event": "after event",
                                           "postpartum": "after birth", "large-fmh": "large FMH"}

# Every stored value of these choice lists has its words (tests/records checks it).
WORD_TABLES: Final = ((EVENT_KINDS, EVENT_WORDS), (RHD + PARTNER_RHD + BABY_RHD, RHD_WORDS),
                      (FETAL_RHD, FETAL_RHD_WORDS), (DAT, DAT_WORDS), (INDICATIONS, INDICATION_WORDS))
