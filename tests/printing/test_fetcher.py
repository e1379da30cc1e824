"""The one fetcher of printing serves fonts, stylesheets and images inside printables/ and
refuses everything else: other schemes, files elsewhere, '..' and symlinks leading out."""
from __future__ import annotations

import os

import pytest
from weasyprint.urls import FatalURLFetchingError

from clinic.printing import PRINTABLES, PrintError
from clinic.printing.fetcher import fetcher_class, printable_path


@pytest.fixture
def fetch():
    return fetcher_class()().fetch


def test_serves_a_font_and_a_stylesheet_of_printables(fetch):
    font = fetch((PRINTABLES / "fonts" / "DejaVuSans.ttf").as_uri())
    assert font.content_type == "font/ttf" and font.read()[:4] == b"\x00\x01\x00\x00"
    css = fetch((PRINTABLES / "card.css").as_uri())
    assert css.content_type == "text/css" and b"@font-face" in css.read()


@pytest.mark.parametrize("url", ["http://127.0.0.1:9/x.png", "https://example.invalid/font.ttf",
                                 "HTTP://example.invalid/a.css", "ftp://example.invalid/a.png",
                                 "data:image/png;base64,iVBORw0KGgo=", "about:blank", "card.css"])
def test_refuses_every_scheme_but_file(fetch, url):
    with pytest.raises(PrintError, match="refused"):
        fetch(url)


def test_refusal_is_fatal_for_weasyprint_too(fetch):
    with pytest.raises(FatalURLFetchingError):
        fetch("http://127.0.0.1:9/x.png")


@pytest.mark.parametrize("url", ["file:///etc/passwd", "file:///etc/hostname", "file:///",
                                 "file://example.invalid" + (PRINTABLES / "card.css").as_uri()[7:]])
def test_refuses_files_outside_printables(fetch, url):
    with pytest.raises(PrintError, match="refused"):
        fetch(url)


@pytest.mark.parametrize("tail", ["../pyproject.toml", "fonts/../card.css", "fonts/%2e%2e/card.css",
                                  "%2E%2E/pyproject.toml"])
def test_refuses_dot_dot_even_when_it_lands_back_inside(fetch, tail):
    with pytest.raises(PrintError, match="'..'"):
        fetch(PRINTABLES.as_uri() + "/" + tail)


def test_refuses_folders_missing_files_and_other_file_types(fetch):
    for url, why in [(PRINTABLES.as_uri() + "/fonts", "no such file"), (PRINTABLES.as_uri(), "outside|no such"),
                     (PRINTABLES.as_uri() + "/missing.png", "no such file"),
                     (PRINTABLES.as_uri() + "/card.html", "not one of"),
                     (PRINTABLES.as_uri() + "/fonts/LICENSE-DejaVu.txt", "not one of")]:
        with pytest.raises(PrintError, match=why):
            fetch(url)


def test_refuses_a_symlink_leading_out_and_serves_one_staying_inside(scratch):
    os.symlink(scratch.parent / "secret.png", scratch / "escape.png")
    os.symlink(scratch.parent, scratch / "up")
    os.symlink(scratch / "ok.png", scratch / "alias.png")
    fetch = fetcher_class()(scratch).fetch
    for name in ("escape.png", "up/secret.png"):
        with pytest.raises(PrintError, match="outside"):
            fetch((scratch / name).as_uri())
    assert fetch((scratch / "alias.png").as_uri()).read()[:4] == b"\x89PNG"
    assert printable_path((scratch / "alias.png").as_uri(), scratch) == (scratch / "ok.png").resolve()


def test_a_root_of_its_own_refuses_the_real_printables(scratch):
    with pytest.raises(PrintError, match="outside"):
        fetcher_class()(scratch).fetch((PRINTABLES / "card.css").as_uri())
