"""From the store to the report's inputs: one ``Case`` per pregnancy, planned by the care engine.

The store is read once (``Store.iter_records``); each pregnancy's entries are grouped and
handed to ``clinic.care.plan_pregnancy`` with its facility's profile and care context (see ``planners``;
both built by ``clinic.care_inputs.build_inputs``) and one fixed
``now`` (the moment the report is made), so every month of a report and of its trend is
judged from the same plans.
"""
from __future__ import annotations

import os
from collections import defaultdict
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta
from pathlib import Path
from typing import Any

from clinic.reports.coverage import Case, MonthReport, ReportError
from clinic.reports.month import Month

# A pregnancy cannot produce anything countable later than this after booking (44 weeks of
# pregnancy at most after a booking at any GA, plus the postpartum late windows): used only
# to skip old pregnancies cheaply, never to decide eligibility.
_ACTIVE_AFTER_BOOKING = timedelta(days=44 * 7 + 60)
PARALLEL_FROM = 3000
_STAMPS = ("created_at", "amended_at", "occurred_at", "born_at", "given_at", "sampled_at")


@dataclass
class Inputs:
    cases: list[Case]
    stock: list[dict]
    facilities: list[str]
    facility_names: dict[str, str] = field(default_factory=dict)
    profile_label: str = ""
    profiles: dict[str, str] = field(default_factory=dict)   # facility -> profile used


@dataclass
class Planner:
    """The profile and care context one facility's pregnancies are planned with."""

    profile: Any
    context: Any
    label: str
    source: str        # "bundle" (the facility's own settings) or "district" (this installation's)


def _planner(care: dict, source: str, where: str) -> Planner:
    """A planner from a care header (``bundle.care_of``: a facility's settings as its bundles carry them)."""
    from clinic.care import Product
    from clinic.care.errors import CareError
    from clinic.care_inputs import build_inputs

    products = tuple(Product(p["name"], int(p["vial_iu"]), tuple(p.get("routes", ["IM"])))
                     for p in care.get("products", []))
    try:
        profile, ctx = build_inputs(care["profile"], care.get("overrides") or {}, timezone=care["timezone"],
                                    products=products, rhd_negative_frequency=care["rhd_negative_frequency"],
                                    maternal_blood_volume_ml=care["maternal_blood_volume_ml"])
    except CareError as e:
        raise ReportError(f"{where} follows protocol profile {care.get('profile')!r}, which this rhledger "
                          f"cannot load ({e}); update rhledger on this laptop") from None
    overrides = ", ".join(f"{k} = {v}" for k, v in sorted(dict(care.get("overrides") or {}).items()))
    label = f"{profile.id} {profile.version}" + (f" (local changes: {overrides})" if overrides else "")
    return Planner(profile, ctx, label, source)


def planners(settings, facility_care: dict[str, dict] | None = None) -> tuple[Planner, dict[str, Planner]]:
    """The district's own planner, and one per facility whose bundles said how it plans.

    A facility's pregnancies are planned with the profile, overrides, time zone and products
    its latest bundle carries, so the district sees what the clinic sees; records of a
    facility that sent no such bundle are planned with this installation's settings
    (the report names the profile used for each facility).
    """
    from clinic.reports.bundle import care_of

    own = _planner(care_of(settings), "district", f"this installation ({settings.facility_id})")
    per = {fid: _planner(v["care"], "bundle", f"facility {fid}") for fid, v in (facility_care or {}).items()}
    return own, per


def _plan_one(own: Planner, per: dict[str, Planner], now: datetime, job):
    from clinic.care import plan_pregnancy
    from clinic.care.errors import CareError

    woman, preg, ents = job
    pl = per.get(preg.get("facility"), own)
    try:
        return plan_pregnancy(woman, preg, ents, now=now, profile=pl.profile, context=pl.context)
    except CareError as e:
        raise ReportError(f"pregnancy {preg['id']} (booked at {preg.get('facility')} on {preg.get('booked_on')}) "
                          f"cannot be planned: {e}; correct the record at the clinic and import its "
                          f"next bundle") from None


_WORKER: dict = {}


def _worker_init(settings, facility_care, now):
    _WORKER["own"], _WORKER["per"] = planners(settings, facility_care)
    _WORKER["now"] = now


def _worker_plan(chunk):
    return [_plan_one(_WORKER["own"], _WORKER["per"], _WORKER["now"], job) for job in chunk]


def _plan_parallel(jobs, settings, facility_care, now, workers: int) -> list:
    """The same plans, made by ``workers`` processes (the engine is pure: no shared state)."""
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    size = max(200, len(jobs) // (workers * 4))
    chunks = [jobs[i:i + size] for i in range(0, len(jobs), size)]
    ctx = multiprocessing.get_context("spawn")   # safe under a threaded web server
    with ProcessPoolExecutor(workers, mp_context=ctx, initializer=_worker_init,
                             initargs=(settings, facility_care, now)) as pool:
        return [plan for part in pool.map(_worker_plan, chunks) for plan in part]


def load_inputs(store, settings, *, now: datetime, first_month: Month | None = None,
                facility_care: dict[str, dict] | None = None,
                facility_names: dict[str, str] | None = None, workers: int | None = None) -> Inputs:
    """Every pregnancy that can count in ``first_month`` or later, with its plan.

    From ``PARALLEL_FROM`` pregnancies on, the plans are made by several processes
    (``workers``; default: the CPU count, at most 8); the result is the same.
    """
    own, per = planners(settings, facility_care)
    women: dict[str, dict] = {}
    pregnancies: dict[str, dict] = {}
    entries: dict[str, list[dict]] = defaultdict(list)
    stock: list[dict] = []
    facilities: set[str] = set()
    for r in store.iter_records():
        kind = r.get("kind")
        if kind == "woman":
            women[r["id"]] = r
        elif kind == "pregnancy":
            pregnancies[r["id"]] = r
        elif kind == "stock":
            stock.append(r)
        elif r.get("pregnancy_id"):
            entries[r["pregnancy_id"]].append(r)
        if r.get("facility"):
            facilities.add(r["facility"])
    cutoff = first_month.first_day if first_month else None
    jobs = []
    used: dict[str, str] = {}
    for pid, preg in pregnancies.items():
        if preg.get("voided"):
            continue
        woman = women.get(preg.get("woman_id"))
        if woman is None:
            raise ReportError(f"pregnancy {pid} (from {preg.get('facility')}) names woman "
                              f"{preg.get('woman_id')}, who is not in the store; import the bundle "
                              f"that holds her")
        if woman.get("voided"):
            continue
        ents = sorted(entries.get(pid, []), key=lambda e: (e.get("created_at") or "", e["id"]))
        if cutoff is not None and not _may_count(preg, ents, cutoff):
            continue
        used[preg.get("facility", "")] = per.get(preg.get("facility"), own).label
        jobs.append((woman, preg, ents))
    if workers is None:
        workers = min(8, os.cpu_count() or 1) if len(jobs) >= PARALLEL_FROM else 1
    if workers > 1:
        plans = _plan_parallel(jobs, settings, facility_care, now, workers)
    else:
        plans = [_plan_one(own, per, now, job) for job in jobs]
    cases = []
    for (woman, preg, ents), plan in zip(jobs, plans, strict=True):
        cases.append(Case(woman, preg, [e for e in ents if not e.get("voided")], plan))
    cases.sort(key=lambda c: (c.facility, c.pregnancy.get("booked_on", ""), c.id))
    labels = {f: used.get(f, (per.get(f) or own).label) for f in facilities}
    return Inputs(cases, stock, sorted(facilities), dict(facility_names or {}), own.label, labels)


def _may_count(preg: dict, ents: list[dict], cutoff: date) -> bool:
    booked = preg.get("booked_on")
    if booked and date.fromisoformat(booked) + _ACTIVE_AFTER_BOOKING >= cutoff:
        return True
    text = cutoff.isoformat()
    return any((e.get(k) or "") >= text for e in ents + [preg] for k in _STAMPS)


@dataclass
class FullReport:
    report: MonthReport
    trend: dict[Month, MonthReport]


def facility_names_from_trust(data_dir: Path) -> dict[str, str]:
    """Facility names as the district trust list gives them (IDs otherwise)."""
    from clinic.signing.trust import load_trust

    return {e.facility_id: e.name for e in load_trust(Path(data_dir)).entries}
