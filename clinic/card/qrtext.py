"""The text in the QR code: ``RHL1:`` then Base45 (RFC 9285) of a mode byte and the message.

Mode byte ``0x00``: the COSE_Sign1 message follows as is. ``0x01``: it follows compressed
with raw DEFLATE (RFC 1951, no zlib header), used only when that is shorter. Base45 and the
prefix use only characters of the QR alphanumeric mode (0-9, A-Z, space, $ % * + - . / :),
so the code is about a third smaller than the same bytes in byte mode.

Reading typed or scanned text (``normalise``):

- surrounding whitespace and control characters (a scanner's trailing Enter, CR/LF, tab)
  are removed. Interior spaces are kept: space is a Base45 character. A trailing space can
  never be part of a Base45 text (the last character of a group is at most ``W``), so
  stripping the end loses nothing;
- the text is upper-cased: Base45 has no lower case, so a scanner that swaps letter case
  (Caps Lock, a keyboard-layout setting) is harmless.
"""
from __future__ import annotations

import zlib

import base45

PREFIX_NAME = "RHL"
FORMAT_VERSION = 1
PREFIX = f"{PREFIX_NAME}{FORMAT_VERSION}:"
MODE_PLAIN = 0
MODE_DEFLATE = 1
BASE45_ALPHABET = "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ $%*+-./:"
# Inflated data larger than this is not a card (a guard against a decompression bomb).
MAX_INFLATED = 64 * 1024
MAX_TEXT = 8000  # far beyond a version 40 QR code


class CardTextError(ValueError):
    """Text that is not a readable card code. ``stage`` says which layer refused it."""

    stage = "text"


class NotACardCode(CardTextError):
    """The text does not begin with the card prefix."""

    stage = "prefix"


class UnsupportedVersion(CardTextError):
    """A card code of a format version this installation does not read."""

    stage = "version"


class DamagedCode(CardTextError):
    """The text has the prefix but its body is damaged or incomplete."""

    stage = "body"


def normalise(text: str) -> str:
    if not isinstance(text, str):
        raise CardTextError("the card code must be text")
    s = "".join(ch for ch in text.strip() if ch not in "\r\n\t\x00\x02\x03\x1d\x1e\x04")
    return s.strip().upper()


def _deflate(data: bytes) -> bytes:
    c = zlib.compressobj(9, zlib.DEFLATED, -15, 9)
    return c.compress(data) + c.flush()


def _inflate(data: bytes) -> bytes:
    d = zlib.decompressobj(-15)
    try:
        out = d.decompress(data, MAX_INFLATED)
    except zlib.error as e:
        raise DamagedCode(f"the code is damaged: its compressed content does not unpack ({e}); "
                          f"scan it again or type it again carefully") from None
    if d.unconsumed_tail:
        raise DamagedCode("the code unpacks to far more than a card holds; it is not a card")
    if not d.eof:
        raise DamagedCode("the code is incomplete: it ends before its content does "
                          "(part of it was cut off); scan it again")
    if d.unused_data:
        raise DamagedCode("the code has extra data after its content; it is damaged")
    return out


def _decodes(body: str) -> bool:
    try:
        base45.b45decode(body)
        return True
    except ValueError:
        return False


def pack(message: bytes) -> str:
    """QR text for a COSE message: compressed when that is shorter."""
    packed = _deflate(message)
    body = bytes([MODE_DEFLATE]) + packed if len(packed) < len(message) else bytes([MODE_PLAIN]) + message
    return PREFIX + base45.b45encode(body).decode("ascii")


def unpack(text: str) -> bytes:
    """The COSE message inside a card code; CardTextError (a subclass) says why not."""
    s = normalise(text)
    if not s:
        raise NotACardCode("nothing was read: the text is empty")
    if len(s) > MAX_TEXT:
        raise NotACardCode(f"the text is {len(s)} characters long; a card code is far shorter")
    if not s.startswith(PREFIX_NAME):
        raise NotACardCode(f"this is not an rhledger card code: it should begin with {PREFIX} "
                           f"but begins with {s[:6]!r}")
    head, sep, body = s.partition(":")
    version = head[len(PREFIX_NAME):]
    if not sep or not version.isdigit():
        raise NotACardCode(f"this is not an rhledger card code: it should begin with {PREFIX}")
    if int(version) != FORMAT_VERSION:
        raise UnsupportedVersion(f"this card uses format version {int(version)}; this installation reads "
                                 f"version {FORMAT_VERSION}. "
                                 + ("Update rhledger to read it." if int(version) > FORMAT_VERSION
                                    else "It is not a version rhledger ever made."))
    for i, ch in enumerate(body):
        if ch not in BASE45_ALPHABET:
            raise DamagedCode(f"character {ch!r} at position {len(head) + 2 + i} cannot occur in a card code; "
                              f"check the scanner's keyboard layout or retype")
    if len(body) % 3 == 1:
        raise DamagedCode("the code is incomplete or has a character too many or too few "
                          "(its length does not fit the Base45 encoding); scan it again")
    try:
        raw = base45.b45decode(body)
    except ValueError:
        if len(body) % 3 == 2 and _decodes(body[:-2]):
            raise DamagedCode("the code is incomplete: its last characters do not form a whole group "
                              "(part of it was cut off); scan it again") from None
        raise DamagedCode("the code is damaged: a group of characters does not decode "
                          "(Base45 value out of range); scan it again") from None
    if not raw:
        raise DamagedCode("the code has a prefix but no content")
    mode, data = raw[0], raw[1:]
    if mode == MODE_PLAIN:
        return data
    if mode == MODE_DEFLATE:
        return _inflate(data)
    raise DamagedCode(f"the code is damaged: unknown packing mode {mode}")
