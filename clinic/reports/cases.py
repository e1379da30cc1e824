"""From the store to the report's inputs: one ``Case`` per pregnancy, planned by the care engine.

Each pregnancy's entries are grouped and handed to ``clinic.care.plan_pregnancy`` with its
facility's profile and care context (``planning.planners``; both built by
``clinic.care_inputs.build_inputs``) and one fixed ``now`` (the moment the report is made), so
every month of a report and of its trend is judged from the same plans.

``load_inputs`` reads and plans through a ``case_cache.CaseCache``: pass the store's own
(``case_cache.cache_for(store)``, as the report pages and commands do) to read and re-plan only
what changed since the last report; without one, everything is read and planned afresh.
"""
from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

from clinic.reports.case_cache import CaseCache
from clinic.reports.coverage import MonthReport
from clinic.reports.month import Month
from clinic.reports.planning import PARALLEL_FROM, Inputs, Planner, planners

__all__ = ["PARALLEL_FROM", "FullReport", "Inputs", "Planner", "facility_names_from_trust", "load_inputs", "planners"]


def load_inputs(store, settings, *, now: datetime, first_month: Month | None = None,
                facility_care: dict[str, dict] | None = None,
                facility_names: dict[str, str] | None = None, workers: int | None = None,
                cache: CaseCache | None = None) -> Inputs:
    """Every pregnancy that can count in ``first_month`` or later, with its plan.

    From ``PARALLEL_FROM`` pregnancies to plan on, the plans are made by several processes
    (``workers``; default: the CPU count, at most 8); the result is the same.
    """
    return (cache or CaseCache()).load(store, settings, now=now, first_month=first_month,
                                       facility_care=facility_care, facility_names=facility_names, workers=workers)


@dataclass
class FullReport:
    report: MonthReport
    trend: dict[Month, MonthReport]


def facility_names_from_trust(data_dir: Path) -> dict[str, str]:
    """Facility names as the district trust list gives them (IDs otherwise)."""
    from clinic.signing.trust import load_trust

    return {e.facility_id: e.name for e in load_trust(Path(data_dir)).entries}
