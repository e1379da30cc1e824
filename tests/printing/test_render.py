"""render_pdf: a problem WeasyPrint only warns about is an error, a refused file stops the
render, and markup that slipped into the HTML still cannot fetch anything."""
from __future__ import annotations

import logging
import os

import pytest

from clinic.printing import PrintError, render_pdf, render_template


def test_a_plain_document_renders():
    assert render_pdf("<p>Nothing to load</p>")[:5] == b"%PDF-"


def test_a_document_may_use_files_of_its_base(scratch):
    pdf = render_pdf('<link rel="stylesheet" href="ok.css"><p><img src="ok.png"> text</p>', base=scratch,
                     stylesheets=["ok.css"])
    assert pdf[:5] == b"%PDF-"


def test_a_missing_image_fails_the_render():
    with pytest.raises(PrintError, match=r"could not print the test note: refused .*missing\.png.*no such file"):
        render_pdf('<p><img src="missing.png"></p>', what="the test note")


@pytest.mark.parametrize("css", ["p { color: nonsense-colour }", "p { colour: red }", "p { display: flexbox-ish }",
                                 "@page { size: A4 sideways }"])
def test_unsupported_css_in_a_stylesheet_is_an_error(scratch, css):
    (scratch / "bad.css").write_text(css + "\n")
    with pytest.raises(PrintError, match="WeasyPrint reported problems: .*(Ignored|[Uu]nsupported|invalid)"):
        render_pdf("<p>x</p>", base=scratch, stylesheets=["bad.css"])


def test_unsupported_css_inline_is_an_error():
    with pytest.raises(PrintError, match="problems"):
        render_pdf('<p style="text-align: sideways">x</p>')


def test_a_quiet_logging_setup_does_not_hide_a_warning():
    logger = logging.getLogger("weasyprint")
    before = logger.level
    logger.setLevel(logging.CRITICAL)
    try:
        with pytest.raises(PrintError, match="problems"):
            render_pdf('<p style="color: nonsense-colour">x</p>')
        assert logger.level == logging.CRITICAL
    finally:
        logger.setLevel(before)


def test_stylesheets_must_be_files_of_the_base(scratch):
    os.symlink(scratch.parent / "secret.css", scratch / "linked.css")
    for name, why in [("../secret.css", "'..'"), (str(scratch.parent / "secret.css"), "outside"),
                      ("linked.css", "outside"), ("absent.css", "no such file")]:
        with pytest.raises(PrintError, match=why):
            render_pdf("<p>x</p>", base=scratch, stylesheets=[name])


def test_a_symlinked_image_leading_out_fails_the_render(scratch):
    os.symlink(scratch.parent / "secret.png", scratch / "escape.png")
    with pytest.raises(PrintError, match="outside"):
        render_pdf('<img src="escape.png">', base=scratch)


@pytest.mark.parametrize("markup", ['<img src="{url}">', '<link rel="stylesheet" href="{url}">',
                                    '<link rel="attachment" href="{url}">', '<p style="background: url({url})">x</p>',
                                    '<style>@import url("{url}");</style>',
                                    '<svg xmlns="http://www.w3.org/2000/svg"><image href="{url}"/></svg>'])
def test_raw_markup_cannot_reach_the_network(listener, markup):
    with pytest.raises(PrintError, match="refused"):
        render_pdf("<p>before</p>" + markup.format(url=listener.url))
    assert not listener.connected()


@pytest.mark.parametrize("url", ["file:///etc/passwd", "file:///etc/hostname", "../pyproject.toml", "/etc/passwd"])
@pytest.mark.parametrize("rel", ["stylesheet", "attachment"])
def test_raw_markup_cannot_read_other_files(url, rel):
    with pytest.raises(PrintError, match="refused"):
        render_pdf(f'<link rel="{rel}" href="{url}"><p>x</p>')


def test_a_template_that_is_not_shipped_is_a_print_error():
    with pytest.raises(PrintError, match="'no-such-note.html' is not in"):
        render_template("no-such-note.html")


def test_templates_escape_record_text(view):
    evil = '<img src="http://127.0.0.1:9/x"><link href="file:///etc/passwd">'
    html = render_template("referral.html", v=view, referral={"to": evil, "reason": evil, "question": evil,
                                                               "date": "1 Nov 2026"}, qr="")
    assert "<img" not in html and "<link" not in html
    assert html.count("&lt;img src=&#34;http://127.0.0.1:9/x&#34;&gt;") == 3
