"""Invented foreign records (as bundles and cards carry them) for the bulk-import tests.

``world(rng)`` makes women, their pregnancies and entries at a few invented facilities, at
version 1; ``copy_at(rec, version, variant)`` is the same record as another facility may hold
it later (higher version, a later amended_at, a field changed); ``mixed_batch`` shuffles
several copies of each so that a batch holds new records, higher and lower versions,
duplicates and entries before their pregnancy.
"""
from __future__ import annotations

import random
from datetime import datetime, timedelta, timezone

FACILITIES = ("far-north", "far-south", "far-east")
ENVELOPE = {"woman_id": None, "pregnancy_id": None, "amended_at": None, "amended_by": None, "version": 1,
            "amendments": [], "schema": 1, "voided": False, "voided_reason": None}


def _utc(dt: datetime) -> str:
    return dt.strftime("%Y-%m-%dT%H:%M:%SZ")


def world(rng: random.Random, women: int = 10, tag: str = "w") -> list[dict]:
    """Version-1 records, parents before children."""
    out = []
    for w in range(women):
        fac = rng.choice(FACILITIES)
        made = datetime(2025, rng.randint(1, 6), rng.randint(1, 28), 8, 0, tzinfo=timezone.utc)
        wid = f"{tag}-woman-{w}"
        out.append({**ENVELOPE, "id": wid, "kind": "woman", "facility": fac, "created_at": _utc(made),
                    "created_by": f"{fac}-clerk", "origin": {"via": "bundle", "facility": fac},
                    "name": f"Invented Person {tag}{w}", "stated_age": 20 + w % 20, "village": "Hill 1"})
        for p in range(rng.randint(1, 2)):
            booked = made + timedelta(days=rng.randint(0, 60) + 150 * p)
            pid = f"{wid}-preg-{p}"
            out.append({**ENVELOPE, "id": pid, "kind": "pregnancy", "facility": fac, "woman_id": wid,
                        "created_at": _utc(booked), "created_by": f"{fac}-midwife",
                        "origin": {"via": "bundle", "facility": fac},
                        "booked_on": booked.strftime("%Y-%m-%d"),
                        "lmp": (booked - timedelta(days=70)).strftime("%Y-%m-%d"), "status": "ongoing"})
            for e in range(rng.randint(0, 4)):
                at = booked + timedelta(days=rng.randint(0, 40))
                base = {**ENVELOPE, "id": f"{pid}-e{e}", "facility": fac, "woman_id": wid, "pregnancy_id": pid,
                        "created_at": _utc(at), "created_by": f"{fac}-midwife",
                        "origin": {"via": "bundle", "facility": fac}}
                if e % 2:
                    out.append({**base, "kind": "referral", "referred_on": at.strftime("%Y-%m-%d"),
                                "to_facility": "District Hospital", "reason": "invented reason 1"})
                else:
                    out.append({**base, "kind": "typing", "abo": "O", "rhd": "negative",
                                "tested_on": at.strftime("%Y-%m-%d"), "lab": "Lab 1"})
    return out


_FIELD = {"woman": "village", "pregnancy": "prior_anti_d", "typing": "lab", "referral": "reason"}


def copy_at(rec: dict, version: int, variant: int = 0) -> dict:
    """``rec`` as amended to ``version`` (variant: a different edit reaching the same version)."""
    if version == 1 and variant == 0:
        return dict(rec)
    out = dict(rec)
    made = datetime.strptime(rec["created_at"], "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=timezone.utc)
    out.update(version=version, amended_at=_utc(made + timedelta(days=version, hours=variant % 3)),
               amended_by=f"{rec['facility']}-editor")
    out[_FIELD[rec["kind"]]] = f"edit {version}.{variant}"
    return out


def mixed_batch(rng: random.Random, records: list[dict], copies: tuple[int, int] = (1, 3)) -> list[dict]:
    """One to three copies of each record at random versions and variants, shuffled."""
    batch = []
    for rec in records:
        for _ in range(rng.randint(*copies)):
            batch.append(copy_at(rec, rng.randint(1, 4), rng.randint(0, 2)))
    rng.shuffle(batch)
    return batch
