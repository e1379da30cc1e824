"""Taking a card's history into this facility's store.

Rules:

1. Only a card read as ``trusted`` is imported. An ``unknown-issuer`` card is refused unless
   the caller says so explicitly (``accept_unknown_issuer``), because it is no better than an
   unsigned paper record; ``altered`` and ``unreadable`` cards are always refused.
2. The pregnancy is matched by its UUID. A pregnancy new here is attached to the woman with
   the card's woman UUID when she is known here; otherwise the duplicate check (same or
   similar name and the same birth date or phone) runs, and a possible match stops the
   import (``PossibleDuplicate``) until the user chooses: ``woman_id=`` a local woman (the
   card's records are attached to her) or ``new_woman=True``.
3. Every record is merged by its UUID through ``Store.merge_foreign_many`` (all validated
   before any is written). A local copy with the same or a higher version is kept as it is
   (never overwritten by the card), so importing the same card twice, or an older issue
   after a newer one, changes nothing.
4. A card's signature vouches only for the issuer's own records (``signer`` of
   ``merge_foreign_many``): another facility's record on it that differs from the copy here
   (a higher version, voided) is never taken in: outcome ``not-owner``, the owner's copy stays
   unchanged, and an ``import-declined`` audit line keeps what the card carried, attributed
   to the issuer. Another facility's record not known here is taken in as carried by the card.
5. Each record taken in carries ``origin = {via: "card", facility, issue}``, and the import
   is logged in ``<data>/cards/imported.jsonl`` (pregnancy, issuer, issue, card code, counts).
"""
from __future__ import annotations

import json
from collections import Counter
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

from clinic.card.codec import Reading
from clinic.card.issue import CARDS_DIR, IMPORTED_FILE
from clinic.records.schema import SCHEMA_VERSION
from clinic.records.values import utc_text
from clinic.signing.files import append_line
from clinic.store.merge import vouched_by

IMPORTER = "card-import"


class CardImportError(RuntimeError):
    """The card cannot be imported; the message says why and what to do."""


class PossibleDuplicate(CardImportError):
    """The woman on the card may already be registered here under another record."""

    def __init__(self, candidates: list[dict]):
        self.candidates = candidates
        names = "; ".join(f"{c.get('name')} (born {c.get('birth_date') or '?'}, reg. {c.get('register_no') or '-'}, "
                          f"id {c['id']})" for c in candidates)
        super().__init__(f"the woman on the card may already be registered here: {names}. Choose the "
                         f"matching woman (--woman ID) or confirm she is new (--new-woman)")


@dataclass
class ImportResult:
    pregnancy_id: str
    woman_id: str
    issuer: str
    issue: int
    # record id -> created / updated / unchanged / kept-local / not-owner
    outcomes: dict[str, str] = field(default_factory=dict)
    linked_to: str | None = None  # local woman the records were attached to

    @property
    def counts(self) -> dict[str, int]:
        return dict(Counter(self.outcomes.values()))

    def to_dict(self) -> dict:
        return {"pregnancy_id": self.pregnancy_id, "woman_id": self.woman_id, "issuer": self.issuer,
                "issue": self.issue, "counts": self.counts, "outcomes": self.outcomes, "linked_to": self.linked_to}


def _foreign(rec: dict, origin: dict, woman_id: str | None) -> dict:
    out = dict(rec)
    out["origin"] = origin
    out["created_by"] = IMPORTER
    if out.get("amended_at"):
        out["amended_by"] = IMPORTER
    out.setdefault("created_at", out.get("amended_at"))
    out["schema"] = SCHEMA_VERSION
    out["amendments"] = []
    if woman_id and rec["kind"] != "woman":
        out["woman_id"] = woman_id
    return out


def import_reading(store, reading: Reading, *, data_dir: Path, by: str = IMPORTER,
                   woman_id: str | None = None, new_woman: bool = False,
                   accept_unknown_issuer: bool = False, now: datetime | None = None) -> ImportResult:
    """Merge a card's history into ``store`` (rules in the module docstring)."""
    now = now or datetime.now(timezone.utc)
    if reading.trust in ("altered", "unreadable") or reading.content is None:
        raise CardImportError(f"this card cannot be imported: {reading.headline.lower()} ({reading.reason})")
    if reading.trust == "unknown-issuer" and not accept_unknown_issuer:
        raise CardImportError("the card's issuer is not in this installation's trust list, so its content "
                              "cannot be checked: enter what you confirm by hand, or import the district's "
                              "newest trust list and read the card again")
    c = reading.content
    origin = {"via": "card", "facility": c.issuer_id, "issue": c.issue}
    woman, preg, entries = c.woman, c.pregnancy, c.entries
    local_preg = store.get(preg["id"])
    attach_to = None
    if local_preg is not None:
        if local_preg["kind"] != "pregnancy":
            raise CardImportError(f"record {preg['id']} is a {local_preg['kind']} here, not a pregnancy")
        if local_preg["woman_id"] != woman["id"]:
            attach_to = local_preg["woman_id"]
    elif woman_id:
        local_w = store.get(woman_id)
        if local_w is None or local_w["kind"] != "woman":
            raise CardImportError(f"there is no woman {woman_id} here")
        attach_to = woman_id if woman_id != woman["id"] else None
    elif store.get(woman["id"]) is None and not new_woman:
        dups = [d for d in store.find_duplicates(woman.get("name", ""), woman.get("birth_date"), woman.get("phone"))
                if d["id"] != woman["id"]]
        if dups:
            raise PossibleDuplicate(dups)
    result = ImportResult(preg["id"], attach_to or woman["id"], c.issuer_id, c.issue, linked_to=attach_to)
    records = ([] if attach_to else [woman]) + [dict(preg, woman_id=attach_to or woman["id"])] + entries
    incoming = []
    for rec in records:
        local = store.get(rec["id"])
        if local is not None and local.get("version", 1) >= rec.get("version", 1):
            same = all(local.get(k) == v for k, v in rec.items()
                       if k not in ("created_by", "amended_by", "origin", "schema", "amendments", "woman_id"))
            # The owner's own card replaces a copy another facility's card carried here.
            owner_over_carried = (not same and rec.get("facility") == c.issuer_id == local["facility"]
                                  and vouched_by(local) != local["facility"])
            if not owner_over_carried:
                result.outcomes[rec["id"]] = "unchanged" if same else "kept-local"
                continue
        incoming.append(_foreign(rec, origin, attach_to))
    # One call: every record is validated before any is written, so a card never half-imports.
    for rec, outcome in zip(incoming, store.merge_foreign_many(incoming, by=by, now=now,
                                                                  signer=c.issuer_id), strict=True):
        result.outcomes[rec["id"]] = outcome
    append_line(Path(data_dir) / CARDS_DIR / IMPORTED_FILE, json.dumps({
        "pregnancy_id": preg["id"], "issuer": c.issuer_id, "issue": c.issue, "card_code": reading.code,
        "trust": reading.trust, "at": utc_text(now), "by": by, "counts": result.counts,
        "linked_to": attach_to}))
    return result
