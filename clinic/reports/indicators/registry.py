"""The indicator registry: what an indicator is, what it yields (``Hit``), and the report's sections.

An indicator is a generator over one ``Case`` and one month that yields a ``Hit`` per member of
its denominator (or of its count). ``@indicator(...)`` registers it. ``INDICATORS`` is in
``SECTIONS`` order, and within a section in the order its module defines them: the order of
every output (screen, CSV, JSON, PDF, FHIR).
"""
from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from datetime import datetime, timezone, tzinfo

from clinic.reports.month import Month
from clinic.reports.pregnancy_case import Case

S_BOOK = "Booking and typing"
S_NEG = "RhD-negative women at booking"
S_ROUTINE = "Routine antenatal prophylaxis"
S_EVENT = "Sensitising events"
S_BIRTH = "Births to RhD-negative women"
S_OUTCOME = "Outcome: new immune sensitisations"
S_USE = "Anti-D used"
SECTIONS = (S_BOOK, S_NEG, S_ROUTINE, S_EVENT, S_BIRTH, S_OUTCOME, S_USE)


@dataclass
class Hit:
    """One member of an indicator's denominator (or, for a count, of its count)."""

    case: Case
    in_numerator: bool
    outcome: str = ""            # e.g. on-time, late, not-given, typed, not-typed
    follow_up: str | None = None  # set when this member needs follow-up: what was missed
    item_code: str | None = None
    due: datetime | None = None   # the deadline or the date that placed it in the month
    record_id: str | None = None
    detail: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Indicator:
    id: str
    section: str
    title: str
    definition: str
    numerator: str
    denominator: str | None      # None: a count, not a proportion
    fn: Callable[[Case, Month, tzinfo], Iterable[Hit]]

    @property
    def is_count(self) -> bool:
        return self.denominator is None


INDICATORS: list[Indicator] = []


HitsFn = Callable[[Case, Month, tzinfo], Iterable[Hit]]


def indicator(id: str, section: str, title: str, definition: str, numerator: str,
              denominator: str | None) -> Callable[[HitsFn], HitsFn]:
    """Register the decorated generator as an indicator of ``section`` (one of SECTIONS)."""
    if section not in SECTIONS:
        raise ValueError(f"indicator {id}: section {section!r} is not one of {SECTIONS}")
    if any(i.id == id for i in INDICATORS):
        raise ValueError(f"indicator {id} is registered twice")

    def deco(fn: HitsFn) -> HitsFn:
        INDICATORS.append(Indicator(id, section, title, definition, numerator, denominator, fn))
        # stable: within a section, the order of definition
        INDICATORS.sort(key=lambda i: SECTIONS.index(i.section))
        return fn
    return deco


def indicator_by_id(ind_id: str) -> Indicator:
    for ind in INDICATORS:
        if ind.id == ind_id:
            return ind
    raise KeyError(ind_id)



def booked_in(case: Case, month: Month) -> bool:
    return month.contains_date(case.pregnancy.get("booked_on"))


def booking_due(case: Case, tz: tzinfo) -> datetime:
    d = case.pregnancy["booked_on"]
    return datetime.fromisoformat(d).replace(tzinfo=tz).astimezone(timezone.utc)


def closed_in(month: Month, closes: datetime | None, tz: tzinfo) -> bool:
    """A window closes in the month when its last moment does: the engine's ``closes`` is the
    deadline itself (often the next local midnight), so a window ending with 30 November
    (closes = 1 December 00:00 local) closed in November."""
    return closes is not None and month.start(tz) < closes <= month.end(tz)
