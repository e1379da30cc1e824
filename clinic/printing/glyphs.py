"""Every character prints: one the bundled fonts cannot draw becomes a placeholder.

The fonts in ``printables/fonts/`` cover the scripts of the regions rhledger serves
(``scripts/bundle-fonts.py``); ``printables/fonts.css`` names a family for each, and the
sheets list those families after their Latin one. ``faces_css`` gives WeasyPrint the
``@font-face`` rules of just the faces a document needs (loading every font for a Latin name
would only slow each print). A character none of them has would make WeasyPrint draw a
.notdef box and warn, and a warning stops the printout (``pdf``): a name in a script not
bundled must not make a card impossible to print. So before rendering, each such character is
replaced by ``PLACEHOLDER`` (a glyph the bundled fonts do have), never dropped in silence:
``uncovered`` says which were replaced.
"""
from __future__ import annotations

import functools
import re
import unicodedata

from clinic.printing.fetcher import PRINTABLES

PLACEHOLDER = "\N{REPLACEMENT CHARACTER}"
FONTS = PRINTABLES / "fonts"
FONTS_CSS = PRINTABLES / "fonts.css"
LATIN = "DejaVuSans.ttf"  # the sheets' own first family: what it draws needs no other face
_NON_ASCII = re.compile(r"[^\x00-\x7f]")
_FACE = re.compile(r'@font-face\s*\{[^}]*?src:\s*url\("([^"]+)"\)[^}]*\}')


def _cmap(path) -> frozenset[int]:
    from fontTools.ttLib import TTFont

    font = TTFont(path, lazy=True)
    try:
        return frozenset(font.getBestCmap() or {})
    finally:
        font.close()


@functools.cache
def _faces() -> tuple[tuple[str, frozenset[int]], ...]:
    """(@font-face rule, code points) of each face of fonts.css, in its order."""
    return tuple((m.group(0), _cmap(PRINTABLES / m.group(1))) for m in _FACE.finditer(FONTS_CSS.read_text()))


@functools.cache
def _latin() -> frozenset[int]:
    return _cmap(FONTS / LATIN)


def faces_css(text: str) -> str:
    """The @font-face rules of fonts.css for the faces that draw a character of ``text`` the
    Latin family lacks (the first face with it, as the sheets' family lists choose)."""
    if text.isascii():
        return ""
    latin, faces = _latin(), _faces()
    wanted: set[int] = set()
    for ch in set(_NON_ASCII.findall(text)):
        o = ord(ch)
        if o in latin:
            continue
        for i, (_, points) in enumerate(faces):
            if o in points:
                wanted.add(i)
                break
    return "\n".join(faces[i][0] for i in sorted(wanted))


@functools.cache
def covered() -> frozenset[int]:
    """Every code point some bundled font has a glyph for."""
    points: set[int] = set()
    for path in sorted(FONTS.iterdir()):
        if path.suffix.lower() in (".ttf", ".otf"):
            points |= _cmap(path)
    return frozenset(points)


def _drawable(ch: str, points: frozenset[int]) -> bool:
    # Format characters (joiners, direction marks) shape the text around them and are never
    # drawn: the fonts need no glyph for them.
    return ord(ch) in points or unicodedata.category(ch) == "Cf" or ch.isspace()


def uncovered(text: str) -> list[str]:
    """The characters of ``text`` no bundled font can draw, in order of first appearance."""
    points = covered()
    return list(dict.fromkeys(ch for ch in _NON_ASCII.findall(text) if not _drawable(ch, points)))


def printable(text: str) -> str:
    """``text`` with each character no bundled font can draw replaced by ``PLACEHOLDER``."""
    if text.isascii():
        return text
    points = covered()
    return _NON_ASCII.sub(lambda m: m.group(0) if _drawable(m.group(0), points) else PLACEHOLDER, text)
