"""The printed card: its QR code decodes from the rendered PDF (300 dpi, and degraded), the
layouts print without any WeasyPrint warning, and printing fetches nothing from outside."""
from __future__ import annotations

import logging

import pypdfium2 as pdfium
import pytest
import zxingcpp
from PIL import Image, ImageFilter

from clinic.card import printing
from clinic.card.codec import read_card
from clinic.card.view import CAUTION, build_view
from tests.card.conftest import CLINIC_NAME, CLINIC_PHONE
from tests.card.histories import CLINIC, NOW, full_history


@pytest.fixture(autouse=True)
def fail_on_weasyprint_warnings(caplog):
    caplog.set_level(logging.WARNING, logger="weasyprint")
    yield
    bad = [r.getMessage() for r in caplog.records if r.name.startswith("weasyprint") and r.levelno >= logging.WARNING]
    assert not bad, f"WeasyPrint warned: {bad}"


def plan_of(w, p, e):
    from clinic.care import CareContext, load_profile, plan_pregnancy
    return plan_pregnancy(w, p, e, now=NOW, profile=load_profile("bsh-2014"), context=CareContext()).to_dict()


@pytest.fixture(scope="module")
def view(full_card):
    w, p, e = full_history()
    return build_view(w, p, e, plan=plan_of(w, p, e), issuer={"name": CLINIC_NAME, "phone": CLINIC_PHONE,
                                                                "facility_id": CLINIC},
                      issue=3, issued_at="2026-11-20T12:00:00Z", card_code=full_card.code, qr_text=full_card.text,
                      qr_version=full_card.qr_version, now=NOW)


@pytest.fixture(scope="module")
def card_pdf(view):
    return printing.card_pdf(view)


def page_image(pdf: bytes, page: int, dpi: int) -> Image.Image:
    doc = pdfium.PdfDocument(pdf)
    try:
        return doc[page].render(scale=dpi / 72).to_pil().convert("L")
    finally:
        doc.close()


def page_text(pdf: bytes, page: int) -> str:
    """The page's text, white space collapsed, lower case (the CSS upper-cases headings)."""
    doc = pdfium.PdfDocument(pdf)
    try:
        return " ".join(doc[page].get_textpage().get_text_range().replace("\xa0", " ").split()).lower()
    finally:
        doc.close()


def decoded(im: Image.Image) -> list[str]:
    return [r.text for r in zxingcpp.read_barcodes(im, formats=zxingcpp.BarcodeFormat.QRCode)]


def test_qr_decodes_from_the_printed_card_at_300_dpi(card_pdf, full_card, trust):
    texts = decoded(page_image(card_pdf, 0, 300))
    assert texts == [full_card.text]
    assert read_card(texts[0], trust).trust == "trusted"


@pytest.mark.parametrize("dpi, blur, angle", [(150, 0.8, 0), (150, 0.8, 3), (150, 0.6, -2)])
def test_qr_decodes_from_a_degraded_print(card_pdf, full_card, dpi, blur, angle):
    im = page_image(card_pdf, 0, dpi).filter(ImageFilter.GaussianBlur(blur))
    if angle:
        im = im.rotate(angle, resample=Image.BICUBIC, expand=True, fillcolor=255)
    assert decoded(im) == [full_card.text]


def test_card_shows_what_a_person_needs(card_pdf):
    front, back = page_text(card_pdf, 0), page_text(card_pdf, 1)
    for words in ("Mara Kellin-Ostrova", "17 Mar 1994", "NC-2026-0417", "16 Nov 2026", "RhD negative",
                  "ANTIBODY PRESENT – REFER", "North Demo Clinic", "+000 555 0100", "Issue 3", "Partner",
                  "Fetal RHD"):
        assert words.lower() in front, words
    for words in ("1:32", "9.8 IU/mL", "Antepartum haemorrhage", "Abdominal trauma", "300 µg / 1500 IU",
                  "100 µg / 500 IU", "LOT-DX4412", "live birth", "DAT positive", "A card with a higher issue number"):
        assert words.lower() in back, words
    for page in (front, back):
        assert CAUTION.lower() in page


def test_pocket_card_pages_are_a6(card_pdf):
    doc = pdfium.PdfDocument(card_pdf)
    try:
        w, h = doc[0].get_size()
        assert len(doc) == 2 and round(w / 72 * 25.4) == 105 and round(h / 72 * 25.4) == 148
    finally:
        doc.close()


def test_sheet_puts_four_cards_on_a4_with_backs_on_page_two(view, full_card):
    pdf = printing.sheet_pdf([view] * 4)
    doc = pdfium.PdfDocument(pdf)
    try:
        w, h = doc[0].get_size()
        assert len(doc) == 2 and (round(w / 72 * 25.4), round(h / 72 * 25.4)) == (210, 297)
    finally:
        doc.close()
    assert decoded(page_image(pdf, 0, 200)).count(full_card.text) == 4
    assert page_text(pdf, 1).count("antibody screens") == 4


def test_png_for_the_phone_decodes(view, full_card):
    import io
    im = Image.open(io.BytesIO(printing.card_png(view, dpi=200)))
    assert im.height > im.width  # front above back
    assert decoded(im.convert("L")) == [full_card.text]


def test_referral_note_carries_reason_question_and_caution(view):
    pdf = printing.referral_pdf(view, {"to": "Demo District Hospital", "reason": "anti-D 9.8 IU/mL at 30+3",
                                       "question": "Please assess for fetal anaemia", "date": "10 Sep 2026"})
    text = page_text(pdf, 0)
    for words in ("Reason for referral", "anti-D 9.8 IU/mL at 30+3", "Please assess for fetal anaemia",
                  "Demo District Hospital", "LOT-DX4410"):
        assert words.lower() in text, words
    assert "decision support only" in text


def test_printing_refuses_anything_outside_printables():
    with pytest.raises(printing.PrintError, match="refused"):
        printing.html_to_pdf('<img src="http://example.invalid/x.png">', ["card.css"])
    with pytest.raises(printing.PrintError, match="refused"):
        printing.html_to_pdf('<img src="file:///etc/hostname">', ["card.css"])


def test_weasyprint_warnings_fail_the_render():
    with pytest.raises(printing.PrintError, match="problems"):
        printing.html_to_pdf('<p style="color: nonsense-colour">x</p>', ["card.css"])


def test_a_history_that_does_not_fit_says_so_on_the_card(clinic_key):
    from clinic.card.codec import make_card_text
    w, p, e = full_history()
    ct = make_card_text(w, p, e, key=clinic_key, issue=1, issued_at="2026-11-20T12:00:00Z", max_version=18)
    assert ct.omitted > 0 and ct.qr_version <= 18
    v = build_view(w, p, e, issuer={"name": CLINIC_NAME, "phone": CLINIC_PHONE, "facility_id": CLINIC}, issue=1,
                   issued_at="2026-11-20T12:00:00Z", card_code=ct.code, qr_text=ct.text, omitted=ct.omitted, now=NOW)
    assert f"{ct.omitted} older" in page_text(printing.card_pdf(v), 0)
