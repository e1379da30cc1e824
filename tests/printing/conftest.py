"""Fixtures of the printing tests: a card view of the invented card history, a tiny district
report, a scratch printables folder, and a local listener that notices any connection."""
from __future__ import annotations

import socket
from datetime import datetime, timezone
from zoneinfo import ZoneInfo

import pytest

from clinic.signing.keys import SigningKey
from tests.card.conftest import CLINIC_NAME, CLINIC_PHONE
from tests.card.histories import CLINIC, NOW, full_history

PNG_1PX = bytes.fromhex("89504e470d0a1a0a0000000d49484452000000010000000108000000003a7e9b55"
                        "0000000a49444154789c636000000002000148afa4710000000049454e44ae426082")  # one black pixel


def card_view(**woman):
    """The card view of the invented full history, with woman's fields replaced by ``woman``."""
    from clinic.card.codec import make_card_text
    from clinic.card.view import build_view

    w, p, e = full_history()
    key = SigningKey.from_seed(CLINIC, b"printing-tests-clinic-seed-01")
    ct = make_card_text(w, p, e, key=key, issue=2, issued_at="2026-11-20T12:00:00Z",
                        issuer_name=CLINIC_NAME, issuer_phone=CLINIC_PHONE)
    return build_view(dict(w, **woman), p, e, issuer={"name": CLINIC_NAME, "phone": CLINIC_PHONE,
                                                       "facility_id": CLINIC},
                      issue=2, issued_at="2026-11-20T12:00:00Z", card_code=ct.code, qr_text=ct.text,
                      qr_version=ct.qr_version, now=NOW)


@pytest.fixture(scope="session")
def view():
    return card_view()


def small_report(facility_names: dict[str, str] | None = None):
    """A district report of two invented facilities with no cases (every cell empty)."""
    from clinic.reports.coverage import compute_month, compute_trend
    from clinic.reports.month import Month

    month, tz, now = Month(2026, 11), ZoneInfo("Africa/Nairobi"), datetime(2026, 12, 1, 12, tzinfo=timezone.utc)
    facilities = ["DEMO-CLINIC-A", "DEMO-CLINIC-B"]
    rep = compute_month([], month, tz, now=now, facilities=facilities, facility_names=facility_names)
    return rep, compute_trend([], month, tz, now=now, months=3, facilities=facilities)


@pytest.fixture
def scratch(tmp_path):
    """A printables-like folder with a stylesheet, an image, and a secret file beside it."""
    root = tmp_path / "printables"
    root.mkdir()
    (root / "ok.png").write_bytes(PNG_1PX)
    (root / "ok.css").write_text("p { color: #222 }\n")
    (tmp_path / "secret.png").write_bytes(PNG_1PX)
    (tmp_path / "secret.css").write_text("p { color: red }\n")
    return root


@pytest.fixture
def listener():
    """A TCP socket on 127.0.0.1; ``connected()`` tells whether anything connected to it."""
    s = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    s.bind(("127.0.0.1", 0))
    s.listen(8)
    s.setblocking(False)

    class Listener:
        port = s.getsockname()[1]
        url = f"http://127.0.0.1:{s.getsockname()[1]}/x.png"

        @staticmethod
        def connected() -> bool:
            try:
                conn, _ = s.accept()
            except BlockingIOError:
                return False
            conn.close()
            return True

    yield Listener
    s.close()
