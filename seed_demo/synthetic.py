"""A large, seeded synthetic dataset for benchmarks: N facilities x M pregnancies each.

Every pregnancy gets realistic entries for where it is on ``now``: typing and a booking
screen; for RhD-negative women the 28-week screen and routine dose, now and then a
sensitising event with its dose, and, once past term, the birth and the postpartum dose
(occasionally late or missing). Bookings are spread back in time at a clinic-like rate
(``per_month`` a facility), so a facility with many pregnancies has many months of them,
as a real one would: that is what the store's monthly partitions are built for.

Written by default through the store's documented bulk path, ``Store.merge_foreign_many``
(every record validated; each partition rewritten once a batch), or with ``--via create``
record by record through ``Store.create`` (2-3 ms a record on an idle laptop SSD, fsync
bound: about a minute per 4,000 pregnancies). Names are generated from invented syllables;
nothing is real.

    python -m seed_demo.synthetic --facilities 50 --pregnancies 2000 --out DIR
"""
from __future__ import annotations

import argparse
import random
import shutil
import sys
import time
import uuid
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone
from pathlib import Path
from typing import Callable, Iterator

from clinic.records.values import utc_text

SYNTH_NAMESPACE = uuid.UUID("0d6c7e52-9a1b-4f3e-8b7d-2c5e9f1a4b63")
TIMEZONE = "Africa/Nairobi"
DISTRICT_ID = "synth-district"
PRODUCT = "Anti-D immunoglobulin 1500 IU (300 µg)"
SMALL_PRODUCT = "Anti-D immunoglobulin 500 IU (100 µg)"

_SYL = ("ka", "li", "mo", "ne", "ra", "su", "to", "wa", "ye", "bi", "da", "fe", "go", "ha", "ji",
        "ku", "la", "mi", "no", "pa", "ri", "sa", "te", "vi", "zo", "an", "el", "or", "um", "is")


class SyntheticError(RuntimeError):
    """The synthetic dataset cannot be written as asked."""


@dataclass(frozen=True)
class Call:
    """One Store.create call."""

    kind: str
    fields: dict
    facility: str
    record_id: str
    at: datetime
    woman_id: str | None = None
    pregnancy_id: str | None = None


def facility_id(i: int) -> str:
    return f"synth-{i + 1:03d}"


def _name(rng: random.Random) -> str:
    def word(n):
        return "".join(rng.choice(_SYL) for _ in range(n)).capitalize()
    return f"{word(rng.randint(2, 3))} {word(rng.randint(2, 4))}"


def pregnancy_calls(fac: str, index: int, *, rng: random.Random, now: datetime, booked_at: datetime,
                    rhd_negative_share: float = 0.3) -> list[Call]:
    """The store calls of one synthetic pregnancy booked at ``booked_at``, up to ``now``."""
    def rid(part: str) -> str:
        return str(uuid.uuid5(SYNTH_NAMESPACE, f"{fac}/{index}/{part}"))

    wid, pid = rid("woman"), rid("pregnancy")
    booking_ga = rng.randint(8 * 7, 16 * 7)
    lmp = (booked_at - timedelta(days=booking_ga)).date()

    def at_ga(days: int, hour: int = 10) -> datetime:
        start = datetime(lmp.year, lmp.month, lmp.day, hour, rng.randint(0, 59), tzinfo=timezone.utc)
        return start + timedelta(days=days)

    negative = rng.random() < rhd_negative_share
    birth_ga = rng.randint(37 * 7, 41 * 7 + 3)
    born = at_ga(birth_ga, rng.randint(0, 23))
    calls = [
        Call("woman", {"name": _name(rng), "stated_age": rng.randint(16, 44),
                       "village": _name(rng).split()[0],
                       "phone": f"+000 {rng.randint(0, 999):03d} {rng.randint(0, 9999):04d}",
                       "register_no": f"{fac.upper()}-{index:06d}"}, fac, wid, booked_at - timedelta(minutes=10)),
        Call("pregnancy", {"booked_on": booked_at.date().isoformat(), "lmp": lmp.isoformat(),
                           "gravidity": (g := rng.randint(1, 6)), "parity": rng.randint(0, g - 1),
                           "status": "ongoing"}, fac, pid, booked_at - timedelta(minutes=5), woman_id=wid),
        Call("typing", {"abo": rng.choice(("A", "B", "AB", "O", "O")), "rhd": "negative" if negative else "positive",
                        "method": "column-agglutination", "tested_on": booked_at.date().isoformat()},
             fac, rid("typing"), booked_at, wid, pid),
        Call("screen", {"sampled_at": utc_text(booked_at), "result": "negative"}, fac, rid("screen-booking"),
             booked_at + timedelta(minutes=3), wid, pid),
    ]
    lot = {"lot": f"SYN-{fac[-3:]}-{booked_at.year % 100:02d}",
           "lot_expiry": (booked_at + timedelta(days=500)).date().isoformat()}
    if negative:
        t28 = at_ga(28 * 7 + rng.randint(0, 10))
        calls.append(Call("screen", {"sampled_at": utc_text(t28), "result": "negative",
                                     "ga_days": (t28.date() - lmp).days},
                          fac, rid("screen-28"), t28, wid, pid))
        if rng.random() < 0.9:
            calls.append(Call("dose", {"given_at": utc_text(t28 + timedelta(minutes=30)), "amount": 1500, "unit": "IU",
                                       "route": "IM", "product": PRODUCT, "indication": "routine-antenatal",
                                       "given_by": "Synthetic midwife", **lot},
                              fac, rid("dose-routine"), t28 + timedelta(minutes=30), wid, pid))
        if rng.random() < 0.12:
            ev_ga = rng.randint(max(12 * 7, booking_ga + 1), 36 * 7)
            tev = at_ga(ev_ga, rng.randint(0, 23))
            ev_id = rid("event")
            calls.append(Call("event", {"event_kind": rng.choice(("antepartum-haemorrhage", "abdominal-trauma",
                                                                  "external-cephalic-version", "amniocentesis")),
                                        "occurred_at": utc_text(tev), "ga_days": ev_ga}, fac, ev_id, tev, wid, pid))
            tdose = tev + timedelta(hours=rng.randint(2, 60))
            calls.append(Call("dose", {"given_at": utc_text(tdose), "amount": 500, "unit": "IU", "route": "IM",
                                       "product": SMALL_PRODUCT, "indication": "sensitising-event",
                                       "given_by": "Synthetic midwife", "covers_id": ev_id, **lot},
                              fac, rid("dose-event"), tdose, wid, pid))
    if born < now - timedelta(hours=2):
        baby = rng.choice(("positive", "positive", "negative")) if negative else rng.choice(("positive", "negative"))
        bid = rid("birth")
        calls.append(Call("birth", {"born_at": utc_text(born), "ga_days": birth_ga, "outcome": "live-birth",
                                    "baby_rhd": baby, "dat": "negative", "cord_sampled": True},
                          fac, bid, born, wid, pid))
        if negative and baby == "positive":
            r = rng.random()
            if r < 0.85:
                tpp = born + timedelta(hours=rng.randint(4, 70))
            elif r < 0.95:
                tpp = born + timedelta(days=rng.randint(4, 9))
            else:
                tpp = None  # missed
            if tpp is not None:
                calls.append(Call("dose", {"given_at": utc_text(tpp), "amount": 500, "unit": "IU", "route": "IM",
                                           "product": SMALL_PRODUCT, "indication": "postpartum",
                                           "given_by": "Synthetic midwife", "covers_id": bid, **lot},
                                  fac, rid("dose-postpartum"), tpp, wid, pid))
        calls.append(Call("status", {"status": "delivered"}, fac, pid, born + timedelta(hours=1)))
    return [c for c in calls if c.at <= now]


def booking_time(index: int, horizon: int, now: datetime, per_month: int, rng: random.Random) -> datetime:
    """Pregnancy ``index`` of a facility that will have ``horizon`` of them: bookings spread
    evenly back from ``now`` at ``per_month`` a month, oldest first."""
    months_back = (horizon - index) / per_month
    t = now - timedelta(days=months_back * 30.44) - timedelta(hours=rng.randint(0, 48))
    return min(t, now - timedelta(days=1)).replace(microsecond=0)


SYNTH_MARKER = "# Synthetic benchmark data (seed_demo.synthetic). Invented; no real facility."


def config_text(facility: str = DISTRICT_ID) -> str:
    return "\n".join([
        SYNTH_MARKER,
        "[facility]", f'id = "{facility}"', 'name = "Synthetic district"', 'kind = "district"',
        f'timezone = "{TIMEZONE}"', "", "[care]", 'profile = "bsh-2014"', "",
        "[stock]", "products = [",
        f'  {{ name = "{PRODUCT}", vial_iu = 1500, routes = ["IM", "IV"] }},',
        f'  {{ name = "{SMALL_PRODUCT}", vial_iu = 500, routes = ["IM"] }},', "]", ""])


def prepare(data_dir: Path, force: bool = False) -> None:
    data_dir = Path(data_dir)
    if data_dir.is_dir() and any(data_dir.iterdir()):
        if not force:
            raise SyntheticError(f"{data_dir} is not empty; choose an empty directory or pass --force")
        config = data_dir / "config.toml"
        first = config.read_text(encoding="utf-8").split("\n", 1)[0] if config.exists() else ""
        if first != SYNTH_MARKER:
            raise SyntheticError(f"{data_dir} is not a synthetic dataset written by this tool (its config.toml "
                                 f"does not start with the synthetic marker), so it is not deleted; "
                                 f"choose an empty directory")
        shutil.rmtree(data_dir)
    data_dir.mkdir(parents=True, exist_ok=True)
    (data_dir / "config.toml").write_text(config_text(), encoding="utf-8")


def apply(store, call: Call) -> None:
    """One call against the store (``now`` is the call's own time, so created_at is realistic)."""
    now = call.at + timedelta(minutes=5)
    if call.kind == "status":
        store.amend(call.record_id, call.fields, by="synthetic", reason="birth recorded", now=now)
        return
    store.create(call.kind, call.fields, by="synthetic", facility=call.facility, woman_id=call.woman_id,
                 pregnancy_id=call.pregnancy_id, record_id=call.record_id, now=now)


def iter_calls(facilities: int, pregnancies: int, seed: int, now: datetime, *, per_month: int = 40,
               rhd_negative_share: float = 0.3, start: int = 0,
               horizon: int | None = None) -> Iterator[list[Call]]:
    """Per pregnancy, its calls; facilities interleaved so the store grows as a district's would.

    ``start`` skips the first pregnancies of each facility and ``horizon`` (default
    start + pregnancies) is how many each facility will have in the end, which sets the
    booking dates: a benchmark grows one dataset in steps with the same horizon.
    """
    horizon = horizon if horizon is not None else start + pregnancies
    for i in range(start, start + pregnancies):
        for f in range(facilities):
            rng = random.Random(f"{seed}/{f}/{i}")
            fac = facility_id(f)
            booked = booking_time(i, horizon, now, per_month, rng)
            yield pregnancy_calls(fac, i, rng=rng, now=now, booked_at=booked, rhd_negative_share=rhd_negative_share)


def stored_records(calls: list[Call]) -> list[dict]:
    """The records these calls leave in a store, envelope included: what Store.create and
    Store.amend would have written (for the bulk path, Store.merge_foreign_many)."""
    from clinic.records.schema import SCHEMA_VERSION

    out: dict[str, dict] = {}
    for c in calls:
        at = utc_text(c.at + timedelta(minutes=5))
        if c.kind == "status":
            rec = out[c.record_id]
            changes = {k: {"old": rec.get(k), "new": v} for k, v in c.fields.items() if rec.get(k) != v}
            rec.update(c.fields)
            rec.update(version=rec["version"] + 1, amended_at=at, amended_by="synthetic",
                       amendments=rec["amendments"] + [{"at": at, "by": "synthetic", "reason": "birth recorded",
                                                        "changes": changes}])
            continue
        out[c.record_id] = {**c.fields, "id": c.record_id, "kind": c.kind, "facility": c.facility,
                            "woman_id": c.woman_id if c.kind != "woman" else None,
                            "pregnancy_id": c.pregnancy_id, "created_at": at, "created_by": "synthetic",
                            "amended_at": None, "amended_by": None, "version": 1, "amendments": [],
                            "origin": None, "schema": SCHEMA_VERSION, "voided": False, "voided_reason": None}
    return list(out.values())


VIA = ("bulk", "create")


def build_synthetic(data_dir, facilities: int = 5, pregnancies: int = 200, seed: int = 1,
                    now: datetime | None = None, *, per_month: int = 40, rhd_negative_share: float = 0.3,
                    via: str = "bulk", batch: int = 500, force: bool = False,
                    progress: Callable[[int, int, float], None] | None = None) -> dict:
    """Write ``facilities`` x ``pregnancies`` synthetic pregnancies into ``data_dir``; return figures.

    ``via="bulk"`` (default) hands ``batch`` pregnancies at a time to the store's documented
    bulk path, ``Store.merge_foreign_many`` (validated, one rewrite per partition touched,
    recorded in the audit log as an import); ``via="create"`` makes every record with
    ``Store.create`` / ``Store.amend`` as a clinic would, one fsync'd write each. Both leave the
    same records. The same seed and now give the same records (ids are uuid5 of facility and
    index).
    """
    from clinic.store import Store

    if facilities < 1 or pregnancies < 1:
        raise SyntheticError("facilities and pregnancies must each be at least 1")
    if not 0 <= rhd_negative_share <= 1:
        raise SyntheticError("rhd_negative_share must be between 0 and 1")
    if via not in VIA:
        raise SyntheticError(f"via {via!r}: choose one of {', '.join(VIA)}")
    now = (now or datetime.now(timezone.utc)).astimezone(timezone.utc).replace(microsecond=0)
    data_dir = Path(data_dir)
    prepare(data_dir, force)
    store = Store(data_dir)
    if via == "bulk" and not hasattr(store, "merge_foreign_many"):
        raise SyntheticError("this store has no merge_foreign_many (bulk path); use via='create'")
    t0 = time.perf_counter()
    creates = amends = done = 0
    total = facilities * pregnancies
    step = max(500, total // 20)  # about twenty progress lines
    pending: list[dict] = []

    def flush():
        if pending:
            store.merge_foreign_many(pending, by="synthetic", now=now)
            pending.clear()

    for calls in iter_calls(facilities, pregnancies, seed, now, per_month=per_month,
                            rhd_negative_share=rhd_negative_share):
        amends += sum(1 for c in calls if c.kind == "status")
        creates += sum(1 for c in calls if c.kind != "status")
        if via == "create":
            for c in calls:
                apply(store, c)
        else:
            pending += stored_records(calls)
        done += 1
        if done % batch == 0:
            flush()
        if progress and (done % step == 0 or done == total):
            progress(done, total, time.perf_counter() - t0)
    flush()
    elapsed = time.perf_counter() - t0
    return {"data_dir": str(data_dir), "facilities": facilities, "pregnancies": total, "records": creates,
            "amendments": amends, "via": via, "seconds": round(elapsed, 2),
            "ms_per_record": round(1000 * elapsed / max(1, creates), 3), "seed": seed, "now": utc_text(now)}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(prog="python -m seed_demo.synthetic", description=__doc__.split("\n\n")[0])
    ap.add_argument("--facilities", type=int, default=5, help="number of facilities (default 5)")
    ap.add_argument("--pregnancies", type=int, default=200, help="pregnancies per facility (default 200)")
    ap.add_argument("--seed", type=int, default=1, help="random seed (default 1)")
    ap.add_argument("--per-month", type=int, default=40, help="bookings per facility per month (default 40)")
    ap.add_argument("--rhd-negative-share", type=float, default=0.3,
                    help="share of RhD-negative women "
                         "(default 0.3: more than a real population, to exercise the rules)")
    ap.add_argument("--via", choices=VIA, default="bulk",
                    help="bulk: Store.merge_foreign_many in batches (fast, default); create: Store.create per record")
    ap.add_argument("--out", required=True, type=Path, help="data directory to write (must be empty, or use --force)")
    ap.add_argument("--force", action="store_true", help="replace an earlier synthetic dataset in --out")
    args = ap.parse_args(argv)

    def progress(done, total, secs):
        print(f"  {done:>8,} / {total:,} pregnancies  {secs:7.1f} s", file=sys.stderr)

    try:
        r = build_synthetic(args.out, args.facilities, args.pregnancies, args.seed, per_month=args.per_month,
                            rhd_negative_share=args.rhd_negative_share, via=args.via, force=args.force,
                            progress=progress)
    except SyntheticError as e:
        print(f"Error: {e}", file=sys.stderr)
        return 1
    print(f"{r['pregnancies']:,} pregnancies in {r['facilities']} facilities: {r['records']:,} records and "
          f"{r['amendments']:,} amendments in {r['seconds']} s via {r['via']} ({r['ms_per_record']} ms a record) "
          f"-> {r['data_dir']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
