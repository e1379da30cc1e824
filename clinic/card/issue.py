"""Issuing cards: the per-pregnancy issue counter, and a card made from the store.

Issue numbers live in the append-only file ``<data>/cards/issued.jsonl``, one JSON line per
card issued here::

    {"pregnancy_id", "issue", "issued_at", "card_code", "sha256", "kid", "history",
     "entries", "omitted", "qr_version", "by"}

``sha256`` is the hash of the signed message (the QR content), ``history`` a hash of the
records on the card (id, version, voided). The next issue of a pregnancy is one more than
the highest number seen for it, here (issued.jsonl) or on a card imported here
(``imported.jsonl``, see ``importing``), so a card printed at the hospital after it took in
issue 3 from the clinic is issue 4, and the newest card always has the highest number.
Printing again when nothing has changed since the last issue gives that same issue again
(same number, same time, and so byte for byte the same signed code).
"""
from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

import filelock

from clinic.card.codec import CardText, make_card_text
from clinic.card.view import build_view
from clinic.records.values import utc_text
from clinic.signing.files import append_line
from clinic.signing.keys import load_signing_key

CARDS_DIR = "cards"
ISSUED_FILE = "issued.jsonl"
IMPORTED_FILE = "imported.jsonl"
LOCK_FILE = "cards.lock"


class CardIssueError(RuntimeError):
    """A card cannot be issued (no such pregnancy, no facility key, an unreadable log)."""


def _read_lines(path: Path) -> list[dict]:
    if not path.exists():
        return []
    out = []
    for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
        if not line.strip():
            continue
        try:
            out.append(json.loads(line))
        except ValueError:
            raise CardIssueError(f"{path} line {n} is not JSON; restore the file from a backup") from None
    return out


def issued(data_dir: Path, pregnancy_id: str | None = None) -> list[dict]:
    """Cards issued here (for one pregnancy when given), oldest first."""
    rows = _read_lines(Path(data_dir) / CARDS_DIR / ISSUED_FILE)
    return [r for r in rows if pregnancy_id is None or r.get("pregnancy_id") == pregnancy_id]


def imported(data_dir: Path, pregnancy_id: str | None = None) -> list[dict]:
    rows = _read_lines(Path(data_dir) / CARDS_DIR / IMPORTED_FILE)
    return [r for r in rows if pregnancy_id is None or r.get("pregnancy_id") == pregnancy_id]


def highest_issue(data_dir: Path, pregnancy_id: str) -> int:
    nums = [int(r["issue"]) for r in issued(data_dir, pregnancy_id)]
    nums += [int(r["issue"]) for r in imported(data_dir, pregnancy_id)]
    return max(nums, default=0)


def history_hash(woman: dict, pregnancy: dict, entries: list[dict]) -> str:
    parts = [(r["id"], r.get("version", 1), bool(r.get("voided"))) for r in [woman, pregnancy, *entries]]
    return hashlib.sha256(json.dumps(sorted(parts)).encode()).hexdigest()[:32]


@dataclass
class IssuedCard:
    card: CardText
    view: dict
    issue: int
    issued_at: str
    reused: bool  # the same issue as last time: nothing had changed


def plan_dict(woman, pregnancy, entries, settings, now: datetime, store=None) -> dict:
    """The care engine's plan for the card's "next actions", as this installation plans (with
    what her earlier pregnancies in ``store`` hand on)."""
    from clinic.care_inputs import plan_from_settings

    return plan_from_settings(settings, (woman, pregnancy, entries), now, store=store).to_dict()


def current_card(data_dir: Path, store, settings, pregnancy_id: str, *,
                 now: datetime | None = None) -> IssuedCard | None:
    """The card last issued, remade, when the history has not changed since; None when a new
    issue is needed (nothing is logged: showing a card never issues one)."""
    return _card(data_dir, store, settings, pregnancy_id, by="", now=now, new_issue=False)


def issue_card(data_dir: Path, store, settings, pregnancy_id: str, *, by: str = "cli",
               now: datetime | None = None) -> IssuedCard:
    """Make (or, when nothing changed, remake) the card of a pregnancy and log its issue."""
    card = _card(data_dir, store, settings, pregnancy_id, by=by, now=now, new_issue=True)
    assert card is not None  # a new issue is always made when one is needed
    return card


def _card(data_dir: Path, store, settings, pregnancy_id: str, *, by: str, now: datetime | None,
          new_issue: bool) -> IssuedCard | None:
    from clinic.store import NotFound
    now = now or datetime.now(timezone.utc)
    try:
        woman, pregnancy, entries = store.history(pregnancy_id)
    except NotFound as e:
        raise CardIssueError(str(e)) from None
    key = load_signing_key(data_dir)
    if key.facility_id != settings.facility_id:
        raise CardIssueError(f"the facility key belongs to {key.facility_id} but the settings say "
                             f"{settings.facility_id}")
    hh = history_hash(woman, pregnancy, entries)
    cards = Path(data_dir) / CARDS_DIR
    cards.mkdir(parents=True, exist_ok=True)
    with filelock.FileLock(str(cards / LOCK_FILE), timeout=30):
        mine = issued(data_dir, pregnancy_id)
        last = mine[-1] if mine else None
        reuse = (last is not None and last.get("history") == hh and last.get("kid") == key.kid.hex()
                 and int(last["issue"]) >= highest_issue(data_dir, pregnancy_id))
        if reuse:
            issue, issued_at = int(last["issue"]), last["issued_at"]
        elif not new_issue:
            return None
        else:
            issue, issued_at = highest_issue(data_dir, pregnancy_id) + 1, utc_text(now)
        card = make_card_text(woman, pregnancy, entries, key=key, issue=issue, issued_at=issued_at,
                              issuer_name=settings.facility_name, issuer_phone=settings.facility_phone)
        if not reuse:
            append_line(cards / ISSUED_FILE, json.dumps({
                "pregnancy_id": pregnancy_id, "issue": issue, "issued_at": issued_at, "card_code": card.code,
                "sha256": card.payload_hash, "kid": key.kid.hex(), "history": hh, "entries": card.included,
                "omitted": card.omitted, "qr_version": card.qr_version, "by": by}))
    plan = plan_dict(woman, pregnancy, entries, settings, now, store=store)
    view = build_view(woman, pregnancy, entries, plan=plan,
                      issuer={"name": settings.facility_name, "phone": settings.facility_phone,
                              "facility_id": settings.facility_id},
                      issue=issue, issued_at=issued_at, card_code=card.code, qr_text=card.text,
                      qr_version=card.qr_version, omitted=card.omitted, tz=settings.tz, now=now)
    return IssuedCard(card, view, issue, issued_at, reuse)


def find_issue_by_code(data_dir: Path, code: str) -> dict | None:
    """The issue log line for a card code read over the phone (case and dash tolerant)."""
    want = code.strip().upper().replace("-", "").replace(" ", "")
    for r in issued(data_dir):
        if r.get("card_code", "").replace("-", "") == want:
            return r
    return None
