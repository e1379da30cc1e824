"""The card, the sheet, the referral note and the district report print through clinic.printing,
load only files of printables/, and record text that looks like markup fetches nothing."""
from __future__ import annotations

import pypdfium2 as pdfium
import pytest

from clinic.card import printing
from clinic.printing import PRINTABLES
from clinic.printing.fetcher import fetcher_class
from clinic.reports.render_pdf import report_html, report_pdf
from tests.printing.conftest import card_view, small_report

REFERRAL = {"to": "Demo District Hospital", "reason": "anti-D 9.8 IU/mL at 30+3",
            "question": "Please assess for fetal anaemia", "date": "10 Sep 2026"}


@pytest.fixture
def fetched(monkeypatch):
    """Every URL the fetcher is asked for during the test."""
    urls: list[str] = []
    cls = fetcher_class()
    real = cls.fetch

    def spy(self, url, headers=None):
        urls.append(url)
        return real(self, url, headers)

    monkeypatch.setattr(cls, "fetch", spy)
    return urls


def text_of(pdf: bytes) -> str:
    """Every page's text with all white space taken out (long values wrap at any character)."""
    doc = pdfium.PdfDocument(pdf)
    try:
        return "".join("".join(p.get_textpage().get_text_range().split()) for p in doc)
    finally:
        doc.close()


def bare(text: str) -> str:
    return "".join(text.split())


def only_printables(urls: list[str]) -> bool:
    prefix = PRINTABLES.as_uri() + "/"
    return bool(urls) and all(u.startswith(prefix) for u in urls)


def test_card_sheet_and_referral_note_print_loading_only_printables(view, fetched):
    card = printing.card_pdf(view)
    sheet = printing.sheet_pdf([view] * 4)
    note = printing.referral_pdf(view, REFERRAL)
    assert all(pdf[:5] == b"%PDF-" for pdf in (card, sheet, note))
    assert "MaraKellin-Ostrova" in text_of(card) and "Pleaseassessforfetalanaemia" in text_of(note)
    assert only_printables(fetched)
    # The stylesheets' @font-face fonts are the shipped ones, not whatever the system has.
    assert {u.rsplit("/", 1)[1] for u in fetched} >= {"card.css", "card-pocket.css", "card-sheet.css",
                                                       "referral.css", "DejaVuSans.ttf", "DejaVuSans-Bold.ttf",
                                                       "DejaVuSansMono.ttf"}


def test_district_report_prints_loading_only_printables(fetched):
    rep, trend = small_report()
    pdf = report_pdf(rep, trend)
    assert pdf[:5] == b"%PDF-" and "RhD" in text_of(pdf)
    assert only_printables(fetched)
    assert {u.rsplit("/", 1)[1] for u in fetched} >= {"report.css", "DejaVuSans.ttf", "DejaVuSans-Bold.ttf"}


EVIL_NAME = '<img src="{url}"> <link rel="stylesheet" href="file:///etc/passwd">'
EVIL_NOTE = '<link rel="attachment" href="file:///etc/passwd"><img src="{url}">'


def test_markup_in_a_name_prints_as_text_and_fetches_nothing(listener, fetched):
    name = EVIL_NAME.format(url=listener.url)
    v = card_view(name=name)
    for pdf in (printing.card_pdf(v), printing.sheet_pdf([v]), printing.referral_pdf(v, REFERRAL)):
        assert bare(name) in text_of(pdf)
    assert only_printables(fetched) and not listener.connected()


def test_markup_in_referral_notes_and_event_notes_prints_as_text_and_fetches_nothing(view, listener, fetched):
    note = EVIL_NOTE.format(url=listener.url)
    v = dict(view, events=[dict(e, notes=note) for e in view["events"]])
    pdf = printing.referral_pdf(v, dict(REFERRAL, reason=note, question=note, to=note))
    assert text_of(pdf).count(bare(note)) == 3 + len(view["events"])  # to, reason, question, each event
    assert only_printables(fetched) and not listener.connected()


def test_markup_in_a_facility_name_of_the_report_fetches_nothing(listener, fetched):
    name = EVIL_NAME.format(url=listener.url)
    rep, trend = small_report({"DEMO-CLINIC-A": name})
    assert "&lt;img" in report_html(rep, trend)
    pdf = report_pdf(rep, trend)
    assert bare(name) in text_of(pdf)
    assert only_printables(fetched) and not listener.connected()


def test_if_markup_were_not_escaped_the_fetcher_would_refuse_it(view, listener, fetched):
    html = printing.render_template("referral.html", v=view, referral=REFERRAL, qr="")
    html = html.replace("Please assess for fetal anaemia", EVIL_NAME.format(url=listener.url))
    with pytest.raises(printing.PrintError, match="could not print the referral note: refused to load"):
        printing.render_pdf(html, stylesheets=["referral.css"], what="the referral note")
    assert not listener.connected()
    # The stylesheet link comes first and its refusal stops the render before the image.
    assert [u for u in fetched if not u.startswith(PRINTABLES.as_uri() + "/")] == ["file:///etc/passwd"]
