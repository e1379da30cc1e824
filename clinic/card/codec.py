"""Card codes end to end: history -> signed QR text, and QR text -> a reading with its trust state.

``make_card_text`` signs the payload (``payload.py``) with COSE_Sign1 and packs it
(``qrtext.py``). When the text would not fit the largest QR code we print
(``MAX_QR_VERSION`` at level M), the oldest entries are left out, newest kept, with their
count in the signed payload so that the card says so.

``read_card`` never raises on bad input: it returns a ``Reading`` whose ``trust`` is one of
``trusted``, ``unknown-issuer``, ``altered``, ``unreadable`` with the reason and what to do
in plain words.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from datetime import date, datetime
from typing import Any

import qrcode
from qrcode.exceptions import DataOverflowError
from qrcode.util import MODE_ALPHA_NUM, QRData

from clinic.card import payload as pl
from clinic.card import qrtext
from clinic.signing import cose
from clinic.signing.errors import CoseFormatError
from clinic.signing.keys import SigningKey
from clinic.signing.trust import TrustList

# The largest QR code printed on a card, and its error-correction level (see docs/card-format.md).
MAX_QR_VERSION = 25
QR_EC_LEVEL = "M"
_EC = {"L": qrcode.constants.ERROR_CORRECT_L, "M": qrcode.constants.ERROR_CORRECT_M,
       "Q": qrcode.constants.ERROR_CORRECT_Q, "H": qrcode.constants.ERROR_CORRECT_H}
TRUST_STATES = ("trusted", "unknown-issuer", "altered", "unreadable")
CROCKFORD = "0123456789ABCDEFGHJKMNPQRSTVWXYZ"

HEADLINE = {
    "trusted": "Issued by a trusted facility",
    "unknown-issuer": "Readable, but the issuer is not in the trust list",
    "altered": "Altered or damaged: the signature does not match",
    "unreadable": "Unreadable",
}
ADVICE = {
    "trusted": "The history below is as the issuing facility recorded it. Check the woman's name and "
               "birth date against her, then use it or import it.",
    "unknown-issuer": "Treat it like an unsigned paper record: confirm the blood group and doses with the "
                      "issuing facility (phone below) or test again before relying on them.",
    "altered": "Do not rely on it. Retype the code from the printed card or scan it again; if it still "
               "fails, confirm the history with the issuing facility and test again.",
    "unreadable": "Nothing on this code can be used. Scan it again, try another way in (scanner, camera, "
                  "photo), or type the code printed on the card.",
}


def card_code(message: bytes) -> str:
    """A short code for the phone: 40 bits of SHA-256 of the signed message, Crockford base32."""
    n = int.from_bytes(hashlib.sha256(message).digest()[:5], "big")
    chars = "".join(CROCKFORD[(n >> (5 * i)) & 31] for i in reversed(range(8)))
    return f"{chars[:4]}-{chars[4:]}"


def qr_version_for(text: str, ec: str = QR_EC_LEVEL) -> int | None:
    """The smallest QR version holding ``text`` in alphanumeric mode at level ``ec``; None if none."""
    q = qrcode.QRCode(version=None, error_correction=_EC[ec], border=4)
    q.add_data(QRData(text, mode=MODE_ALPHA_NUM))
    try:
        q.make(fit=True)
    except (DataOverflowError, ValueError):
        return None
    return q.version


def qr_matrix(text: str, ec: str = QR_EC_LEVEL) -> list[list[bool]]:
    """The QR modules (True = dark), without the quiet zone."""
    q = qrcode.QRCode(version=None, error_correction=_EC[ec], border=0)
    q.add_data(QRData(text, mode=MODE_ALPHA_NUM))
    q.make(fit=True)
    return q.get_matrix()


@dataclass(frozen=True)
class CardText:
    text: str
    message: bytes        # the COSE_Sign1 bytes
    payload: bytes        # the CBOR content
    code: str             # short card code
    qr_version: int
    qr_ec: str
    included: int         # entries on the QR
    omitted: int          # older entries left out

    @property
    def payload_hash(self) -> str:
        return hashlib.sha256(self.message).hexdigest()


def _keep_order(entries: list[dict]) -> list[dict]:
    """Entries from the first to drop to the last: oldest first, but the latest typing of the
    woman, her partner and the fetal RHD last of all."""
    ordered = pl.order_entries(entries)
    protected = []
    for kind in pl.ALWAYS_KEEP:
        of_kind = [r for r in ordered if r["kind"] == kind and not r.get("voided")]
        if of_kind:
            protected.append(of_kind[-1]["id"])
    return [r for r in ordered if r["id"] not in protected] + [r for r in ordered if r["id"] in protected]


def make_card_text(woman: dict, pregnancy: dict, entries: list[dict], *, key: SigningKey, issue: int,
                   issued_at: str, issuer_name: str = "", issuer_phone: str = "",
                   max_version: int = MAX_QR_VERSION, ec: str = QR_EC_LEVEL) -> CardText:
    """Sign and pack a history. Leaves out the oldest entries only when it must."""
    drop_order = _keep_order(list(entries))
    keep = list(drop_order)
    omitted = 0
    while True:
        content = pl.CardContent(woman, pregnancy, keep, key.facility_id, issuer_name, issuer_phone,
                                 issue, issued_at, omitted)
        body = pl.encode_content(content)
        message = cose.sign1(body, key)
        text = qrtext.pack(message)
        version = qr_version_for(text, ec)
        if version is not None and version <= max_version:
            return CardText(text, message, body, card_code(message), version, ec, len(keep), omitted)
        if not keep:
            raise pl.PayloadError(f"even without entries the card code needs more than a version "
                                  f"{max_version} QR code; shorten the woman's or pregnancy's free text")
        keep = keep[1:]
        omitted += 1


# ---- reading ---------------------------------------------------------------------------

@dataclass
class Reading:
    """What reading a card code found. ``content`` is None when nothing could be decoded."""

    trust: str
    reason: str
    via: str = "text"
    content: pl.CardContent | None = None
    code: str | None = None
    kid: str | None = None
    issuer: dict = field(default_factory=dict)
    stage: str | None = None  # for unreadable: which layer refused
    chars: int = 0

    @property
    def headline(self) -> str:
        return HEADLINE[self.trust]

    @property
    def advice(self) -> str:
        return ADVICE[self.trust]

    @property
    def ok(self) -> bool:
        return self.trust in ("trusted", "unknown-issuer")

    def to_dict(self) -> dict[str, Any]:
        d = {"trust": self.trust, "headline": self.headline, "reason": self.reason, "advice": self.advice,
             "via": self.via, "card_code": self.code, "kid": self.kid, "issuer": self.issuer,
             "chars": self.chars}
        if self.stage:
            d["stage"] = self.stage
        if self.content is not None:
            c = self.content
            d.update(issue=c.issue, issued_at=c.issued_at, omitted_entries=c.omitted,
                     history={"woman": c.woman, "pregnancy": c.pregnancy, "entries": c.entries})
        return d


def _issued_day(text: str) -> date:
    return datetime.fromisoformat(text.replace("Z", "+00:00")).date()


def read_card(text: Any, trust: TrustList, *, via: str = "text") -> Reading:
    """Decode and check a card code. Never raises for bad input."""
    try:
        return _read(text, trust, via)
    except Exception as e:  # noqa: BLE001 - the decoder's promise: a reading, never a crash
        return Reading("unreadable", f"the code could not be decoded ({type(e).__name__}: {e})", via,
                       stage="internal")


def _read(text: Any, trust: TrustList, via: str) -> Reading:
    if isinstance(text, bytes):
        try:
            text = text.decode("utf-8")
        except UnicodeDecodeError:
            return Reading("unreadable", "the code is not text", via, stage="text")
    chars = len(text) if isinstance(text, str) else 0
    try:
        message = qrtext.unpack(text)
    except qrtext.CardTextError as e:
        return Reading("unreadable", str(e), via, stage=e.stage, chars=chars)
    code = card_code(message)
    try:
        msg = cose.parse1(message)
    except CoseFormatError as e:
        return Reading("unreadable", f"the code is damaged: it is not a signed record ({e})", via,
                       code=code, stage="cose", chars=chars)
    peek = pl.peek_issue(msg.payload)
    on_date = _issued_day(peek[2]) if peek else None
    verified = trust.verify(msg, on_date=on_date)
    try:
        content = pl.decode_content(msg.payload)
    except pl.PayloadError as e:
        if verified.state == "altered":
            return Reading("altered", f"{verified.reason}; and the content does not decode ({e})", via,
                           code=code, kid=msg.kid.hex(), stage="payload", chars=chars)
        return Reading("unreadable", f"the content is not a card this installation understands ({e})",
                       via, code=code, kid=msg.kid.hex(), stage="payload", chars=chars)
    issuer = {"facility_id": content.issuer_id, "name": content.issuer_name, "phone": content.issuer_phone,
              "listed_name": None, "listed_phone": None}
    reason = verified.reason
    state = verified.state
    if verified.entry is not None:
        issuer["listed_name"] = verified.entry.name
        issuer["listed_phone"] = verified.entry.phone
    if state == "trusted" and verified.facility_id != content.issuer_id:
        state = "altered"
        reason = (f"the card names {content.issuer_id} as issuer but was signed by "
                  f"{verified.facility_id}")
    return Reading(state, reason, via, content, code, msg.kid.hex(), issuer, chars=chars)
