"""A hand-built, invented district: two clinics, November 2026, every case chosen by hand.

No real people or facilities: names are made up and say what each case tests.
Times are local wall-clock in Africa/Nairobi (UTC+3, no daylight saving); the store
converts them to UTC. The report is made as at NOW (1 Dec 2026 15:00 local).

The test files work out every numerator and denominator from the cases below by hand.
"""
from __future__ import annotations

import uuid
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone
from pathlib import Path
from zoneinfo import ZoneInfo

TZ = ZoneInfo("Africa/Nairobi")
NOW = datetime(2026, 12, 1, 12, 0, tzinfo=timezone.utc)
A, B, DISTRICT_ID = "clinic-a", "clinic-b", "district-x"
_NS = uuid.UUID("0b3f2a55-1111-4b8e-9c1e-3d2f6a7b8c90")


def rid(label: str) -> str:
    return str(uuid.uuid5(_NS, label))


def local(text: str) -> datetime:
    """'2026-11-08 10:00' local -> aware datetime."""
    return datetime.fromisoformat(text).replace(tzinfo=TZ)


CONFIG = """\
[facility]
id = "{fid}"
name = "{name}"
kind = "{kind}"
timezone = "Africa/Nairobi"

[care]
profile = "bsh-2014"

[[accounts]]
username = "officer"
display_name = "District Officer"
role = "district-officer"
password_hash = "{pw}"

[[accounts]]
username = "lab"
display_name = "Lab Tech"
role = "lab"
password_hash = "{pw}"

[[accounts]]
username = "midwife"
display_name = "Midwife"
role = "midwife"
password_hash = "{pw}"
"""
PASSWORD = "correct-horse-9"


def write_config(data_dir: Path, fid: str, name: str, kind: str) -> None:
    from werkzeug.security import generate_password_hash

    data_dir.mkdir(parents=True, exist_ok=True)
    pw = generate_password_hash(PASSWORD, method="pbkdf2:sha256:1000")
    (data_dir / "config.toml").write_text(CONFIG.format(fid=fid, name=name, kind=kind, pw=pw), encoding="utf-8")


@dataclass
class Op:
    at: datetime                 # when it was entered (local)
    facility: str                # who entered it
    action: str                  # create | amend | void | transfer
    label: str                   # record label (its id is rid(label))
    kind: str = ""
    fields: dict = field(default_factory=dict)
    woman: str | None = None
    pregnancy: str | None = None
    reason: str = ""
    to: str = ""                 # transfer: the facility that takes the woman in (card import)


OPS: list[Op] = []


def _add(op: Op) -> None:
    OPS.append(op)


def woman_with_pregnancy(fac, label, name, booked_on, lmp, status="ongoing", **preg):
    at = local(f"{booked_on} 09:00")
    _add(Op(at, fac, "create", f"{label}/w", "woman", {"name": name, "stated_age": 26,
                                                      "village": f"{label} village", "phone": "+000 0000"}))
    _add(Op(at + timedelta(minutes=1), fac, "create", f"{label}/p", "pregnancy",
            {"booked_on": booked_on, "lmp": lmp, "status": status, **preg}, woman=f"{label}/w"))


def entry(fac, label, sub, kind, at_text, **fields):
    _add(Op(local(at_text) + timedelta(minutes=5), fac, "create", f"{label}/{sub}", kind, fields,
            woman=f"{label}/w", pregnancy=f"{label}/p"))


def typing(fac, label, day, abo, rhd):
    entry(fac, label, "typing", "typing", f"{day} 09:30", abo=abo, rhd=rhd, tested_on=day)


def dose(fac, label, sub, at_text, indication, covers=None, amount=500, unit="IU", lot=None):
    f = dict(given_at=at_text.replace(" ", "T"), amount=amount, unit=unit, route="IM", lot=lot or f"{fac}-LOT-1",
             lot_expiry="2027-06-30", indication=indication, given_by="Nurse Invented")
    if covers:
        f["covers_id"] = rid(f"{label}/{covers}")
    entry(fac, label, sub, "dose", at_text, **f)


def birth(fac, label, at_text, baby_rhd):
    entry(fac, label, "birth", "birth", at_text, born_at=at_text.replace(" ", "T"), outcome="live-birth",
          baby_rhd=baby_rhd, cord_sampled=baby_rhd != "not-tested")


def event(fac, label, sub, at_text, kind="antepartum-haemorrhage"):
    entry(fac, label, sub, "event", at_text, event_kind=kind, occurred_at=at_text.replace(" ", "T"))


# ---- clinic A ----------------------------------------------------------------------
# Booked in November
woman_with_pregnancy(A, "P1", "Amina Test-One", "2026-11-03", "2026-08-25")
typing(A, "P1", "2026-11-03", "O", "negative")
entry(A, "P1", "screen", "screen", "2026-11-03 10:00", sampled_at="2026-11-03T10:00", result="negative")
entry(A, "P1", "partner", "partner_typing", "2026-11-03 11:00", rhd="positive")

woman_with_pregnancy(A, "P2", "Beatrix Test-Two", "2026-11-10", "2026-09-01")
typing(A, "P2", "2026-11-10", "A", "positive")

woman_with_pregnancy(A, "P3", "Chipo Test-Untyped", "2026-11-20", "2026-09-10")

# She books at A, moves to B; B takes in her card (same UUIDs) and screens her there.
woman_with_pregnancy(A, "M", "Dalia Test-Moved", "2026-11-05", "2026-08-20")
typing(A, "M", "2026-11-05", "B", "negative")
_add(Op(local("2026-11-20 09:00"), A, "transfer", "M", to=B))
entry(B, "M", "screen", "screen", "2026-11-25 09:00", sampled_at="2026-11-25T09:00", result="negative")

# Routine antenatal prophylaxis (two-dose profile: on time until the end of 28+6 / 34+6)
# R1: 28+6 is 10 Nov. The dose was first entered as 10 Nov (on time), then amended to
# 11 Nov 10:00, one day outside the window.
woman_with_pregnancy(A, "R1", "Esi Test-Routine-Late", "2026-05-05", "2026-04-22")
typing(A, "R1", "2026-05-05", "O", "negative")
dose(A, "R1", "dose1", "2026-11-10 10:00", "routine-antenatal")
_add(Op(local("2026-11-30 08:00"), A, "amend", "R1/dose1", fields={"given_at": "2026-11-11T10:00"},
        reason="date entered wrongly: the dose was given on 11 November"))
# R2: 28+6 is 20 Nov; given at 28+3.
woman_with_pregnancy(A, "R2", "Fatma Test-Routine-On-Time", "2026-05-12", "2026-05-02")
typing(A, "R2", "2026-05-12", "A", "negative")
dose(A, "R2", "dose1", "2026-11-17 09:00", "routine-antenatal")
# R3: 28+6 is 25 Nov; no dose.
woman_with_pregnancy(A, "R3", "Grace Test-Routine-Missed", "2026-05-15", "2026-05-07")
typing(A, "R3", "2026-05-15", "O", "negative")

# Events on both sides of the month boundary in local time (none counts in November):
# 31 Oct 23:30 local (October) and 1 Dec 00:30 local (= 30 Nov 21:30 UTC, December here).
woman_with_pregnancy(A, "E4", "Halima Test-Event-Boundary", "2026-06-10", "2026-06-01")
typing(A, "E4", "2026-06-10", "O", "negative")
event(A, "E4", "ev-oct", "2026-10-31 23:30")
event(A, "E4", "ev-dec", "2026-12-01 00:30")

# Births at A
woman_with_pregnancy(A, "B1", "Imani Test-Birth-71h59", "2026-03-01", "2026-02-08", status="delivered")
typing(A, "B1", "2026-03-01", "O", "negative")
birth(A, "B1", "2026-11-08 10:00", "positive")
entry(A, "B1", "fmh", "fmh", "2026-11-08 12:00", method="kleihauer-betke", sampled_at="2026-11-08T12:00",
      fetal_cell_percent=0.1, covers_id=rid("B1/birth"))
dose(A, "B1", "dose", "2026-11-11 09:59", "postpartum", covers="birth")      # 71 h 59 min

woman_with_pregnancy(A, "B2", "Jamila Test-Birth-72h01", "2026-03-05", "2026-02-14", status="delivered")
typing(A, "B2", "2026-03-05", "O", "negative")
birth(A, "B2", "2026-11-14 10:00", "positive")
dose(A, "B2", "dose", "2026-11-17 10:01", "postpartum", covers="birth")      # 72 h 01 min

woman_with_pregnancy(A, "B5", "Kesi Test-Birth-After-Window", "2026-03-01", "2026-02-01", status="delivered")
typing(A, "B5", "2026-03-01", "A", "negative")
birth(A, "B5", "2026-11-05 10:00", "positive")
dose(A, "B5", "dose", "2026-11-16 11:00", "postpartum", covers="birth")      # 11 days: after the 10-day window

# Stock at A: lot 1 received 20, 5 given, 2 lost to a cold-chain break; lot 2 expires 15 Jan 2027.
for label, move, at, lot, expiry, vials in (
        ("SA1", "received", "2026-10-01 08:00", "A-LOT-1", "2027-06-30", 20),
        ("SA2", "received", "2026-11-02 08:00", "A-LOT-2", "2027-01-15", 10),
        ("SA3", "cold-chain-break", "2026-11-20 08:00", "A-LOT-1", "2027-06-30", 2),
        ("SA4", "given", "2026-11-30 18:00", "A-LOT-1", "2027-06-30", 5),
        ("SA5", "received", "2026-12-01 09:00", "A-LOT-1", "2027-06-30", 50)):   # after the month: not counted
    _add(Op(local(at), A, "create", label, "stock", {"move": move, "at": at.replace(" ", "T"),
                                                     "product": "Anti-D 1500 IU", "vial_iu": 1500,
                                                     "lot": lot, "lot_expiry": expiry, "vials": vials}))

# ---- clinic B ----------------------------------------------------------------------
woman_with_pregnancy(B, "P4", "Lulu Test-Four", "2026-11-15", "2026-09-05")
typing(B, "P4", "2026-11-15", "O", "negative")

# R4: 34+6 is 15 Nov; both doses on time. R5: 34+6 is 28 Nov; second dose not given.
woman_with_pregnancy(B, "R4", "Mariam Test-Both-Doses", "2026-04-01", "2026-03-16")
typing(B, "R4", "2026-04-01", "O", "negative")
dose(B, "R4", "dose1", "2026-09-30 09:00", "routine-antenatal")
dose(B, "R4", "dose2", "2026-11-10 09:00", "routine-antenatal")
woman_with_pregnancy(B, "R5", "Nia Test-Second-Missing", "2026-04-10", "2026-03-29")
typing(B, "R5", "2026-04-10", "A", "negative")
dose(B, "R5", "dose1", "2026-10-13 09:00", "routine-antenatal")
# R6: 28+6 is 30 Nov, so the window closes at 1 Dec 00:00 local: it closed in November.
# Given at 22:00 on 30 Nov, two hours before the deadline.
woman_with_pregnancy(B, "R6", "Wanjiru Test-Last-Day", "2026-05-20", "2026-05-12")
typing(B, "R6", "2026-05-20", "B", "negative")
dose(B, "R6", "dose1", "2026-11-30 22:00", "routine-antenatal")

# Sensitising events in November
woman_with_pregnancy(B, "E1", "Olivia Test-Event-71h59", "2026-06-10", "2026-06-01")
typing(B, "E1", "2026-06-10", "O", "negative")
event(B, "E1", "ev", "2026-11-05 10:00")
dose(B, "E1", "dose", "2026-11-08 09:59", "sensitising-event", covers="ev", amount=100, unit="ug")  # 71 h 59 min
woman_with_pregnancy(B, "E2", "Penda Test-Event-72h01", "2026-06-10", "2026-06-01")
typing(B, "E2", "2026-06-10", "O", "negative")
event(B, "E2", "ev", "2026-11-12 08:00", kind="abdominal-trauma")
dose(B, "E2", "dose", "2026-11-15 08:01", "sensitising-event", covers="ev")                        # 72 h 01 min
woman_with_pregnancy(B, "E3", "Rehema Test-Event-None", "2026-06-10", "2026-06-01")
typing(B, "E3", "2026-06-10", "O", "negative")
event(B, "E3", "ev", "2026-11-20 14:00")
dose(B, "E3", "dose", "2026-11-21 09:00", "sensitising-event", covers="ev")
_add(Op(local("2026-11-21 12:00"), B, "void", "E3/dose", reason="entered on the wrong woman"))

# Births at B
woman_with_pregnancy(B, "B3", "Sauda Test-Baby-Untyped", "2026-03-10", "2026-02-18", status="delivered")
typing(B, "B3", "2026-03-10", "O", "negative")
birth(B, "B3", "2026-11-18 06:00", "not-tested")
woman_with_pregnancy(B, "B4", "Tumaini Test-Baby-Negative", "2026-03-12", "2026-02-22", status="delivered")
typing(B, "B4", "2026-03-12", "O", "negative")
birth(B, "B4", "2026-11-22 08:00", "negative")

# A new immune anti-D found in November, after an event dose in October.
woman_with_pregnancy(B, "S1", "Upendo Test-Sensitised", "2026-06-25", "2026-06-20",
                     prior_anti_d="anti-D after her first birth in 2024 (from her card)")
typing(B, "S1", "2026-06-25", "O", "negative")
event(B, "S1", "ev", "2026-10-02 10:00")
dose(B, "S1", "dose", "2026-10-03 10:00", "sensitising-event", covers="ev")
entry(B, "S1", "screen", "screen", "2026-11-26 09:00", sampled_at="2026-11-26T09:00", result="positive",
      antibodies=["anti-D"], titre=16, titre_antibody="anti-D", anti_d_origin="immune")

# Stock at B: one lot, expired on 20 Nov with 3 vials left.
for label, move, at, vials in (("SB1", "received", "2026-09-01 08:00", 6), ("SB2", "given", "2026-11-15 09:00", 3)):
    _add(Op(local(at), B, "create", label, "stock", {"move": move, "at": at.replace(" ", "T"),
                                                     "product": "Anti-D 1500 IU", "vial_iu": 1500,
                                                     "lot": "B-LOT-1", "lot_expiry": "2026-11-20", "vials": vials}))

OPS.sort(key=lambda o: o.at)


# ---- building stores ----------------------------------------------------------------

def apply(op: Op, store) -> None:
    """Apply one op to a store (a clinic's own, or the all-in-one truth store)."""
    if op.action == "create":
        store.create(op.kind, op.fields, by=f"user@{op.facility}", facility=op.facility,
                     woman_id=rid(op.woman) if op.woman else None,
                     pregnancy_id=rid(op.pregnancy) if op.pregnancy else None,
                     record_id=rid(op.label), now=op.at)
    elif op.action == "amend":
        store.amend(rid(op.label), op.fields, by=f"user@{op.facility}", reason=op.reason, now=op.at)
    elif op.action == "void":
        store.void(rid(op.label), by=f"user@{op.facility}", reason=op.reason, now=op.at)
    else:
        raise AssertionError(op.action)


def build_truth(data_dir: Path):
    """One store holding everything, as if every clinic had entered into it directly."""
    from clinic.store import Store

    write_config(data_dir, DISTRICT_ID, "Invented District", "district")
    store = Store(data_dir)
    for op in OPS:
        if op.action != "transfer":
            apply(op, store)
    return store


class Clinics:
    """Each clinic's own store. ``advance(until)`` enters the ops up to ``until``; a transfer
    copies the woman's records from one clinic's store into the other's, as a card import does."""

    def __init__(self, root: Path, *, existing: bool = False):
        from clinic.signing.keys import ensure_facility_key
        from clinic.store import Store

        self.root = root
        self.stores = {}
        for fid, name in ((A, "Invented Clinic A"), (B, "Invented Clinic B")):
            d = root / fid
            if not existing:
                write_config(d, fid, name, "clinic")
                ensure_facility_key(d, fid, seed=f"invented demo seed {fid}".encode())
            self.stores[fid] = Store(d)
        self.applied = len(OPS) if existing else 0

    @classmethod
    def copy_of(cls, template: Path, root: Path) -> "Clinics":
        """The clinics of ``template`` (fully entered) copied to ``root``: cheaper than entering again."""
        import shutil

        shutil.copytree(template, root)
        return cls(root, existing=True)

    def dir(self, fid: str) -> Path:
        return self.root / fid

    def advance(self, until: datetime | None = None) -> "Clinics":
        while self.applied < len(OPS) and (until is None or OPS[self.applied].at <= until):
            op = OPS[self.applied]
            if op.action == "transfer":
                src, dst = self.stores[op.facility], self.stores[op.to]
                w, p, ents = src.history(rid(f"{op.label}/p"))
                for r in [w, p] + ents:
                    dst.merge_foreign(dict(r, origin={"via": "card", "facility": op.facility, "issue": 1}),
                                      now=op.at)
            else:
                apply(op, self.stores[op.facility])
            self.applied += 1
        return self


def install_trust(district_dir: Path, clinic_dirs: dict[str, Path]) -> None:
    """Give the district a signed trust list naming the clinics' keys (as the district office does)."""
    from clinic.signing.keys import ensure_facility_key, load_signing_key
    from clinic.signing.trust import TrustEntry, TrustKey, build_trust_list, import_trust_list

    ensure_facility_key(district_dir, DISTRICT_ID, seed=b"invented demo seed district-x")
    signer = load_signing_key(district_dir)
    entries = [TrustEntry(fid, f"Invented Clinic {fid[-1].upper()}", "clinic", "",
                          (TrustKey(load_signing_key(d).public_raw),)) for fid, d in clinic_dirs.items()]
    data = build_trust_list(entries, signer, district_name="Invented District", seq=1)
    import_trust_list(district_dir, data, expected_fingerprint=signer.fingerprint)
