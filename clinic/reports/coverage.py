"""The monthly coverage report: indicators computed from records and the care engine's plans.

Pure: no Flask, no TinyDB. Input is a list of ``Case`` (one pregnancy: woman, pregnancy,
entries and the care engine's ``Plan`` for it) and the stock records; output is a
``MonthReport`` that the ``render_*`` modules format.

Every eligibility and timing decision is read from the plan (``pregnancy_case.py``). The
indicators (``clinic.reports.indicators``, one module per section) only count: which month
a thing falls in (local time in the district's time zone), and who is in a numerator or a
denominator. They never recompute a clinical rule. This module runs them over the cases and
adds up the cells, the follow-up lists, the anti-D used and the stock.

Attribution: a pregnancy counts once, for the facility that created its pregnancy record
(where she booked), even when records of her come from two clinics' bundles. Follow-up
lists also show the facility that saw her last.
"""
from __future__ import annotations

from collections import Counter
from collections.abc import Iterable
from dataclasses import dataclass, field
from datetime import datetime, tzinfo

from clinic.reports.indicators import INDICATORS, Hit, Indicator, closed_in, indicator, indicator_by_id
from clinic.reports.month import Month, percentage, percentage_text
from clinic.reports.pregnancy_case import Case, ReportError, done, eligible, outcome_of
from clinic.reports.stock import EXPIRY_WARNING_DAYS, balances
from clinic.reports.usage import UsageRow, UsageTally

__all__ = ["ATTRIBUTION", "CAUTION", "DISTRICT", "INDICATORS", "NULL_PERCENT", "TIME_ZONE_NOTE", "Case", "Cell",
           "FollowUp", "Hit", "Indicator", "MonthReport", "ReportError", "UsageRow", "closed_in", "compute_month",
           "compute_trend", "done", "eligible", "indicator", "indicator_by_id", "outcome_of"]

DISTRICT = "*district*"
CAUTION = ("These numbers are only as complete as the data entered: a typing, screen or dose "
           "given but not recorded counts as missed, and a woman not entered is not counted at all.")
NULL_PERCENT = "A percentage is left empty when its denominator is 0 (nothing to measure), never shown as 0 %."
ATTRIBUTION = ("Each pregnancy counts once, for the facility that created its pregnancy record "
               "(where she booked), even when her records arrive in bundles from two clinics; "
               "follow-up lists also name the facility that saw her last.")
TIME_ZONE_NOTE = "Months run from local midnight on the 1st to local midnight on the 1st of the next month."



@dataclass
class FollowUp:
    """One woman to follow up (names are added only for roles that may see them)."""

    indicator: str
    facility: str
    last_facility: str
    woman_id: str
    pregnancy_id: str
    what: str
    outcome: str
    item_code: str | None
    due: datetime | None
    record_id: str | None
    detail: dict


@dataclass
class Cell:
    indicator: str
    facility: str
    numerator: int = 0
    denominator: int | None = None
    outcomes: Counter = field(default_factory=Counter)

    @property
    def percentage(self) -> float | None:
        return percentage(self.numerator, self.denominator)

    @property
    def percentage_text(self) -> str:
        """The percentage as printed: never "100.0" for not all nor "0.0" for some."""
        return percentage_text(self.percentage)


@dataclass
class MonthReport:
    month: Month
    tz: str
    facilities: list[str]
    cells: dict[tuple[str, str], Cell]
    follow_up: list[FollowUp]
    sensitisations: list[FollowUp]
    usage: list[UsageRow]
    stock: list  # clinic.reports.stock.LotBalance
    generated_at: datetime
    profile: str
    facility_names: dict[str, str] = field(default_factory=dict)
    profiles: dict[str, str] = field(default_factory=dict)   # facility -> protocol profile planned with
    members: set[str] = field(default_factory=set)   # pregnancy ids counted anywhere this month

    def cell(self, facility: str, ind_id: str) -> Cell:
        return self.cells[(facility, ind_id)]

    @property
    def columns(self) -> list[str]:
        return self.facilities + [DISTRICT]

    def facility_name(self, fid: str) -> str:
        if fid == DISTRICT:
            return "District"
        return self.facility_names.get(fid, fid)


def compute_month(cases: list[Case], month: Month, tz: tzinfo, *, now: datetime,
                  stock_records: Iterable[dict] = (), facilities: Iterable[str] = (),
                  facility_names: dict[str, str] | None = None, profile: str = "",
                  profiles: dict[str, str] | None = None, with_lists: bool = True) -> MonthReport:
    """The report for one month: every indicator per facility and for the district."""
    if now.tzinfo is None:
        raise ReportError("now must be timezone-aware")
    stock_records = list(stock_records)
    facs = set(facilities) | {c.facility for c in cases} | {s.get("facility", "") for s in stock_records}
    facs.discard("")
    fac_list = sorted(facs)
    cells: dict[tuple[str, str], Cell] = {}
    for ind in INDICATORS:
        for f in fac_list + [DISTRICT]:
            cells[(f, ind.id)] = Cell(ind.id, f, 0, None if ind.is_count else 0)
    follow: list[FollowUp] = []
    sens: list[FollowUp] = []
    usage = UsageTally(month, tz)
    members: set[str] = set()
    for case in cases:
        if month not in case.months(tz):
            continue
        for ind, hits in case.hits(month, tz, INDICATORS):
            for hit in hits:
                members.add(case.id)
                for f in (case.facility, DISTRICT):
                    c = cells[(f, ind.id)]
                    c.outcomes[hit.outcome] += 1
                    if hit.in_numerator:
                        c.numerator += 1
                    if c.denominator is not None:   # a proportion, not a count
                        c.denominator += 1
                if with_lists and hit.follow_up:
                    fu = FollowUp(ind.id, case.facility, case.last_facility, case.woman["id"], case.id,
                                  hit.follow_up, hit.outcome, hit.item_code, hit.due, hit.record_id,
                                  hit.detail)
                    (sens if ind.id == "new_sensitisations" else follow).append(fu)
        usage.add(case.of_kind("dose"), (case.facility, DISTRICT))
    follow.sort(key=lambda x: (x.facility, x.indicator, x.due or now, x.pregnancy_id))
    sens.sort(key=lambda x: (x.facility, x.due or now))
    usage_rows = usage.rows()
    stock = balances(stock_records, at=month.end(tz), warn_days=EXPIRY_WARNING_DAYS,
                     day=month.last_day) if with_lists else []
    return MonthReport(month, str(getattr(tz, "key", tz)), fac_list, cells, follow, sens, usage_rows,
                       stock, now, profile, dict(facility_names or {}), dict(profiles or {}), members)


def compute_trend(cases: list[Case], month: Month, tz: tzinfo, *, now: datetime, months: int = 12,
                  facilities: Iterable[str] = ()) -> dict[Month, MonthReport]:
    """Reports (counts only, no lists) for the ``months`` months ending with ``month``."""
    return {m: compute_month(cases, m, tz, now=now, facilities=facilities, with_lists=False)
            for m in month.trend(months)}

