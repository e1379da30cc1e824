"""A missed dose travels with the woman on paper too: the card and the referral note say plainly
that the postpartum dose was missed and what follows (a follow-up antibody screen and one at
her next booking: common practice, profile section missed_dose; the booking screen: BSH 2016,
White et al., abstract), instead of "nothing due"; an earlier pregnancy's missed dose is on the
card of the next one."""
from __future__ import annotations

import logging

import pytest

from clinic.card import printing
from clinic.card.view import build_view
from clinic.care import CareContext, load_profile, plan_pregnancy
from clinic.care.planning.carried import summarise_earlier
from tests.card.conftest import CLINIC_NAME, CLINIC_PHONE
from tests.card.histories import CLINIC, NOW, record
from tests.card.test_printed_card import page_text

ISSUER = {"name": CLINIC_NAME, "phone": CLINIC_PHONE, "facility_id": CLINIC}


@pytest.fixture(autouse=True)
def fail_on_weasyprint_warnings(caplog):
    caplog.set_level(logging.WARNING, logger="weasyprint")
    yield
    assert not [r for r in caplog.records if r.name.startswith("weasyprint") and r.levelno >= logging.WARNING]


def missed_history():
    """RhD negative, routine dose given, baby RhD positive born 2026-10-27, no postpartum dose."""
    w = record("woman", 301, {"name": "Odile Marrow-Keth", "stated_age": 31, "register_no": "NC-2026-0301"})
    p = record("pregnancy", 302, {"booked_on": "2026-03-10", "lmp": "2026-01-20", "status": "delivered"},
               woman_id=w["id"])
    P = dict(woman_id=w["id"], pregnancy_id=p["id"])
    e = [record("typing", 303, {"abo": "O", "rhd": "negative", "tested_on": "2026-03-10"}, **P),
         record("screen", 304, {"sampled_at": "2026-03-10T09:00:00Z", "result": "negative"}, **P),
         record("birth", 305, {"born_at": "2026-10-27T06:00:00Z", "outcome": "live-birth", "baby_rhd": "positive",
                               "dat": "negative"}, **P)]
    return w, p, e


def _plan(w, p, e, earlier=()):
    return plan_pregnancy(w, p, e, now=NOW, profile=load_profile("bsh-2014"), context=CareContext(),
                          earlier=earlier)


def _view(w, p, e, plan):
    return build_view(w, p, e, plan=plan.to_dict(), issuer=ISSUER, issue=1, issued_at="2026-11-20T12:00:00Z",
                      card_code="ABCD-EFGH", qr_text="RH1:TEST", now=NOW)


def test_the_card_says_the_dose_was_missed_and_what_follows():
    w, p, e = missed_history()
    v = _view(w, p, e, _plan(w, p, e))
    (m,) = v["missed"]
    assert m["line"] == ("Anti-D after birth (27 Oct 2026) was not given. Antibody screen from 25 Apr 2027 and at "
                         "the booking of her next pregnancy.")          # 180 days after the birth: common practice
    assert v["actions"] == []
    back = page_text(printing.card_pdf(v), 1)
    assert "missed: anti-d after birth (27 oct 2026) was not given" in back
    assert "nothing due from this record" not in back


def test_the_referral_note_says_it_too():
    w, p, e = missed_history()
    v = _view(w, p, e, _plan(w, p, e))
    note = {"to": "Demo District Hospital", "reason": "postnatal review", "question": "", "date": "20 Nov 2026"}
    text = page_text(printing.referral_pdf(v, note), 0)
    assert "missed anti-d and earlier pregnancies" in text
    assert "anti-d after birth (27 oct 2026) was not given" in text and "nothing due from this record" not in text


def test_the_next_pregnancy_s_card_carries_the_earlier_missed_dose():
    w, p, e = missed_history()
    earlier = summarise_earlier(p, e, _plan(w, p, e))
    p2 = record("pregnancy", 310, {"booked_on": "2026-11-18", "lmp": "2026-09-10", "status": "ongoing"},
                woman_id=w["id"])
    t2 = record("typing", 311, {"abo": "O", "rhd": "negative", "tested_on": "2026-11-18"},
                woman_id=w["id"], pregnancy_id=p2["id"])
    plan2 = _plan(w, p2, [t2], earlier=[earlier])
    assert [a.code for a in plan2.alerts_with("earlier-dose-missed")] == ["earlier-dose-missed"]
    v = _view(w, p2, [t2], plan2)
    (line,) = v["earlier"]
    assert line["which"] == "Earlier pregnancy (booked 10 Mar 2026, birth 27 Oct 2026)"
    assert line["lines"] == ["anti-D missed: anti-D after birth (2026-10-27). Antibody screen at this booking."]
    back = page_text(printing.card_pdf(v), 1)
    assert "earlier pregnancy (booked 10 mar 2026, birth 27 oct 2026): anti-d missed" in back


def test_the_front_of_the_card_points_to_it():
    w, p, e = missed_history()
    v = _view(w, p, e, _plan(w, p, e))
    assert v["carried_line"] == "Anti-D missed \u2013 see the back"
    assert "anti-d missed \u2013 see the back" in page_text(printing.card_pdf(v), 0)
