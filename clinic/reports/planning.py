"""Planning a district's pregnancies: one planner (profile and care context) per facility, as its
bundles say it plans, and the plans made in this process or, for many pregnancies, in several.

Each plan comes with the times of ``now`` it holds for (``clinic.reports.plan_cache``), so
``case_cache`` can keep it for later reports.
"""
from __future__ import annotations

import os
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta
from typing import Any

from clinic.reports.coverage import Case, ReportError

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

    @property
    def key(self) -> str:
        """What a kept plan must have been made with to be reused (profile data and context)."""
        from clinic.reports.plan_cache import planner_key

        k = self.__dict__.get("_key")
        if k is None:
            k = self.__dict__["_key"] = planner_key(self.profile, self.context)
        return k


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
    """The plan of one (woman, pregnancy, entries) and the times it holds for (a PlanEntry)."""
    from clinic.care.errors import CareError
    from clinic.reports.plan_cache import plan_for_now

    woman, preg, ents = job
    pl = per.get(preg.get("facility"), own)
    try:
        return plan_for_now(woman, preg, ents, now=now, profile=pl.profile, context=pl.context)
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


def plan_jobs(jobs, own: Planner, per: dict[str, Planner], settings, facility_care, now: datetime,
              workers: int | None = None) -> list:
    """PlanEntry of each job, in order; from ``PARALLEL_FROM`` jobs on in several processes
    (``workers``; default: the CPU count, at most 8); the result is the same."""
    if workers is None:
        workers = min(8, os.cpu_count() or 1) if len(jobs) >= PARALLEL_FROM else 1
    if workers > 1 and jobs:
        return _plan_parallel(jobs, settings, facility_care, now, workers)
    return [_plan_one(own, per, now, job) for job in jobs]


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


def may_count(preg: dict, ents: list[dict], cutoff: date) -> bool:
    booked = preg.get("booked_on")
    if booked and date.fromisoformat(booked) + _ACTIVE_AFTER_BOOKING >= cutoff:
        return True
    text = cutoff.isoformat()
    return any((e.get(k) or "") >= text for e in ents + [preg] for k in _STAMPS)
