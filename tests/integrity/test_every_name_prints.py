"""Every name prints. A name in Amharic, Devanagari, Bengali, Tamil, Chinese, Thai, Burmese or
Khmer script, or with an emoji, prints on the card and the referral note with the bundled
fonts (its letters read back from the PDF with pypdfium2); a character no bundled font has
prints as a placeholder, never an error; control characters are refused on input.

The printouts are made in a child process whose fontconfig knows no fonts at all
(``FONTCONFIG_FILE``), so they prove the bundled fonts suffice: fonts installed on the laptop
(or on this test machine) cannot stand in for them."""
from __future__ import annotations

import base64
import json
import os
import subprocess
import sys
import unicodedata

import pypdfium2 as pdfium
import pytest

from clinic.card import printing
from clinic.card.codec import make_card_text
from clinic.card.view import build_view
from clinic.records.validate import ValidationError
from clinic.signing.keys import SigningKey
from tests.card.histories import CLINIC, NOW, full_history
from tests.conftest import FACILITY_ID, USERNAME

NAMES = {
    "amharic": "አበበች ከበደ",
    "devanagari": "सीता देवी",
    "bengali": "রহিমা খাতুন",
    "tamil": "மீனா குமாரி",
    "chinese": "王秀英",
    "thai": "สมศรี ใจดี",
    "burmese": "အေးအေး မောင်",
    "khmer": "សុខ ចាន់ធី",
    "emoji": "Amina 🌸 Wanjiru",
}


@pytest.fixture(scope="module")
def key():
    return SigningKey.from_seed(CLINIC, b"integrity-tests-name-seed-01")


def _view(key, name):
    w, p, e = full_history()
    w = dict(w, name=name)
    card = make_card_text(w, p, e, key=key, issue=1, issued_at="2026-11-20T12:00:00Z")
    return build_view(w, p, e, plan=None, issuer={"name": "North Demo Clinic", "phone": "+000 555 0100",
                                                  "facility_id": CLINIC},
                      issue=1, issued_at="2026-11-20T12:00:00Z", card_code=card.code, qr_text=card.text,
                      qr_version=card.qr_version, now=NOW)


def _text(pdf: bytes) -> str:
    doc = pdfium.PdfDocument(pdf)
    try:
        return "".join(doc[i].get_textpage().get_text_range() for i in range(len(doc)))
    finally:
        doc.close()


def _letters(name: str) -> set[str]:
    """The letters of a name (vowel signs and marks may come back reordered from a PDF)."""
    return {ch for ch in name if unicodedata.category(ch) in ("Lo", "Ll", "Lu")}


UNCOVERED = "Siti ꦱꦶꦠꦶ 𓀀"  # Javanese and Egyptian hieroglyphs: not among the bundled fonts
REFERRAL = {"to": "Demo District Hospital", "reason": "antibodies", "question": "", "date": "20 Nov 2026"}


def _print_all() -> dict:
    """What each printout gave (run in the child process): {label: {"text": ...} or {"error": ...}}."""
    key = SigningKey.from_seed(CLINIC, b"integrity-tests-name-seed-01")
    out = {}
    jobs = [(f"card:{s}", lambda n=n: printing.card_pdf(_view(key, n))) for s, n in NAMES.items()]
    jobs += [(f"referral:{s}", lambda n=NAMES[s]: printing.referral_pdf(_view(key, n), REFERRAL))
             for s in ("amharic", "chinese", "burmese", "emoji")]
    jobs.append(("card:uncovered", lambda: printing.card_pdf(_view(key, UNCOVERED))))
    for label, job in jobs:
        try:
            out[label] = {"text": _text(job())}
        except Exception as e:  # noqa: BLE001 - reported to the test, which fails on it
            out[label] = {"error": f"{type(e).__name__}: {str(e)[:300]}"}
    return out


@pytest.fixture(scope="module")
def printed(tmp_path_factory):
    conf = tmp_path_factory.mktemp("fontconfig") / "fonts.conf"
    conf.write_text('<?xml version="1.0"?>\n<!DOCTYPE fontconfig SYSTEM "fonts.dtd">\n'
                    f"<fontconfig><cachedir>{conf.parent / 'cache'}</cachedir></fontconfig>\n")
    env = dict(os.environ, FONTCONFIG_FILE=str(conf))
    res = subprocess.run([sys.executable, "-m", "tests.integrity.test_every_name_prints"], env=env,
                         capture_output=True, text=True, timeout=600)
    assert res.returncode == 0, res.stderr[-2000:]
    return json.loads(base64.b64decode(res.stdout.strip().splitlines()[-1]))


@pytest.mark.parametrize("script", list(NAMES))
def test_a_card_prints_a_name_in_each_script(printed, script):
    got = printed[f"card:{script}"]
    assert "error" not in got, got.get("error")
    missing = _letters(NAMES[script]) - set(got["text"])
    assert not missing, f"{script}: {sorted(missing)} not in the card's text"


@pytest.mark.parametrize("script", ["amharic", "chinese", "burmese", "emoji"])
def test_the_referral_note_prints_the_name(printed, script):
    got = printed[f"referral:{script}"]
    assert "error" not in got, got.get("error")
    assert not (_letters(NAMES[script]) - set(got["text"]))


def test_a_character_no_font_has_prints_as_a_placeholder(printed):
    from clinic.printing.glyphs import PLACEHOLDER, uncovered

    assert uncovered(UNCOVERED)
    got = printed["card:uncovered"]
    assert "error" not in got, got.get("error")
    assert "Siti" in got["text"] and PLACEHOLDER in got["text"]


def test_the_sheet_and_png_print_too(key):
    v = _view(key, NAMES["khmer"])
    assert printing.sheet_pdf([v, v]).startswith(b"%PDF")
    assert printing.card_png(v).startswith(b"\x89PNG")


@pytest.mark.parametrize("bad", ["Ami\x07na", "Amina\x1b[31m", "Ami\x85na", "Ami\ud800na"])
def test_control_characters_are_refused_with_a_clear_message(store, now, bad):
    with pytest.raises(ValidationError) as e:
        store.create("woman", {"name": bad, "stated_age": 25}, by=USERNAME, facility=FACILITY_ID, now=now)
    assert "name" in e.value.errors and "character" in e.value.errors["name"]
    assert "U+" in e.value.errors["name"]


def test_line_breaks_and_tabs_are_text(store, now):
    w = store.create("woman", {"name": "Amina", "stated_age": 25, "address": "Upper Ridge\nnear the well\t2"},
                     by=USERNAME, facility=FACILITY_ID, now=now).record
    assert w["address"] == "Upper Ridge\nnear the well\t2"


if __name__ == "__main__":  # the child process of ``printed``
    print(base64.b64encode(json.dumps(_print_all()).encode()).decode())
