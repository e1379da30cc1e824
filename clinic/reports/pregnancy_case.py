"""One pregnancy as the district report sees it: its records and the care engine's plan.

The report reads the plan, never recomputes it: an item's ``state`` (``not-needed`` means
not eligible), ``closes`` (the window's hard end), ``timeliness`` (``on-time`` / ``late``),
``done_at``, and the plan's ``rhd.managed_as``. A plan may come as the engine's object or as
its ``to_dict()`` form (``attr`` reads either).
"""
from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone, tzinfo
from typing import Any

from clinic.care.codes import lapsed
from clinic.records.values import parse_utc
from clinic.reports.month import Month


class ReportError(ValueError):
    """The report cannot be made from these inputs (say which and why)."""


def attr(obj: Any, name: str, default: Any = None) -> Any:
    """An attribute of an engine object (or a key of its to_dict() form)."""
    if isinstance(obj, dict):
        return obj.get(name, default)
    return getattr(obj, name, default)


def as_dt(value: Any) -> datetime | None:
    if value is None or value == "":
        return None
    if isinstance(value, datetime):
        return value if value.tzinfo else value.replace(tzinfo=timezone.utc)
    return parse_utc(str(value))


@dataclass
class Case:
    """One pregnancy as the report sees it."""

    woman: dict
    pregnancy: dict
    entries: list[dict]          # the pregnancy's entries, voided ones left out
    plan: Any                    # clinic.care Plan
    facility: str = ""           # attributed facility (see ATTRIBUTION)
    last_facility: str = ""      # facility of the latest entry
    uses_fetal_rhd: bool = False  # kept for callers; the report reads the plan's fetal-rhd-test item instead

    def __post_init__(self) -> None:
        if not self.facility:
            self.facility = self.pregnancy.get("facility", "")
        if not self.last_facility:
            latest = max(self.entries + [self.pregnancy], key=lambda r: r.get("created_at") or "")
            self.last_facility = latest.get("facility", self.facility)
        self._items = list(attr(self.plan, "items", []) or [])
        self._by_code: dict[str, Any] = {}
        self._by_cat: dict[str, list] = defaultdict(list)
        for it in self._items:
            self._by_code.setdefault(attr(it, "code"), it)
            self._by_cat[attr(it, "category")].append(it)
        self._by_kind: dict[str, list[dict]] = defaultdict(list)
        for e in self.entries:
            self._by_kind[e.get("kind", "")].append(e)
        self._months: dict = {}
        # What the indicators found in a month, by (month, zone): a function of the records and
        # the plan's items alone, so copies of the case with the plan's ``now`` moved on share it.
        self._hits: dict = {}

    def months(self, tz: tzinfo) -> frozenset:
        """Every month this pregnancy can count in: the months of its booking, of each item's
        deadline, and of each dated entry (a cheap filter; the indicators decide)."""
        key = str(tz)
        if key not in self._months:
            out = set()
            if self.pregnancy.get("booked_on"):
                out.add(Month.parse(self.pregnancy["booked_on"][:7]))
            for it in self._items:
                c = as_dt(attr(it, "closes"))
                if c is not None:
                    out.add(Month.of(c - _EPS, tz))
            for e in self.entries:
                for k in _ENTRY_TIMES:
                    if e.get(k):
                        out.add(Month.of(parse_utc(e[k]), tz))
            self._months[key] = frozenset(out)
        return self._months[key]

    def hits(self, month: Month, tz: tzinfo, indicators) -> tuple:
        """((indicator, (Hit, ...)), ...) of the ``indicators`` with a hit for this case in ``month``
        (worked out once; kept small: a district holds a hundred thousand cases)."""
        key = (month, str(tz), tuple(ind.id for ind in indicators))
        got = self._hits.get(key)
        if got is None:
            found = []
            for ind in indicators:
                hits = tuple(ind.fn(self, month, tz))
                if hits:
                    found.append((ind, hits))
            got = self._hits[key] = tuple(found) if found else ()
        return got

    @property
    def id(self) -> str:
        return self.pregnancy["id"]

    @property
    def items(self) -> list:
        return list(self._items)

    def item(self, code: str):
        return self._by_code.get(code)

    def items_of(self, category: str) -> list:
        return self._by_cat.get(category, [])

    @property
    def managed_as(self) -> str | None:
        return attr(attr(self.plan, "rhd"), "managed_as")

    def alerts_with(self, code: str) -> list:
        return [a for a in (attr(self.plan, "alerts", []) or []) if attr(a, "code") == code]

    def of_kind(self, kind: str) -> list[dict]:
        return self._by_kind.get(kind, [])

    def entry(self, record_id: str | None) -> dict | None:
        for e in self.entries:
            if e.get("id") == record_id:
                return e
        return None

    def births(self) -> list[dict]:
        return sorted(self.of_kind("birth"), key=lambda b: b["born_at"])


_EPS = timedelta(microseconds=1)
_ENTRY_TIMES = ("occurred_at", "born_at", "given_at", "sampled_at")


def eligible(item) -> bool:
    return item is not None and attr(item, "state") != "not-needed"


def planned(item) -> bool:
    """Eligible, or planned and later closed as no longer needed (the choice it informed is gone):
    such an item stays in a coverage denominator, as not done, and is never counted as missed."""
    return eligible(item) or (item is not None and lapsed(attr(item, "state"), attr(item, "reason")))


def done(item) -> bool:
    return item is not None and attr(item, "state") == "done"


# Still open when the report was made: the deadline has not passed (overdue is not open).
STILL_OPEN = ("due", "not-yet-due")
OPEN_FOLLOW_UP = "deadline still open when the report was made: give it before the deadline"


def outcome_of(item) -> str:
    """on-time / late (the engine's timeliness) for a done item; "open" when the engine still
    has it due (its deadline had not passed when the report was made); else not-given."""
    if done(item):
        t = attr(item, "timeliness")
        return t if t in ("on-time", "late") else "given"
    if attr(item, "state") in STILL_OPEN:
        return "open"
    return "not-given"

