"""Expected anti-D doses per day and week, from the care engine's plans and the event rate.

Pure: plans in, numbers out. Every clinical decision (which dose, how much, whether it is
still needed) is the care engine's: this module only reads plan items' ``state``,
``opens``, ``due``, ``dose_iu`` and the plan's ``fetal_rhd_probability``, and places each
dose on a day of the horizon.

Three kinds of demand:

- known doses (weight 1): every item with a dose that is ``due`` or ``overdue`` now (day 0),
  and every ``not-yet-due`` item whose window ``opens`` inside the horizon (routine doses,
  repeat doses), on the local day it opens;
- expected births: the ``postpartum-dose`` item of a pregnancy not yet delivered, on the
  EDD, weighted by the chance that the baby is RhD positive (the plan's
  ``fetal_rhd_probability``: the partner's typing, a cell-free fetal RHD result, or the
  population RhD-negative frequency under Hardy-Weinberg);
- sensitising events not yet happened: at the facility's own rate over the last 365 days
  (event doses the engine planned, not "not-needed"), each product's share of them.

Each dose is counted in one stocked product: the one that gives it with the least anti-D
drawn, then the fewest vials (``allocate``). The upper figure treats births and events as
two Poisson counts and adds their ``percentile`` quantiles (in vials) to the known doses,
rounded up to whole vials (a Poisson of the same mean is wider than the sum of the births'
Bernoulli chances, so it errs high; the births' quantile is capped at the number of births
counted). A rare event (a mean far below one in the period) has a
90th percentile of 0, so in a short period the upper figure may be below the expected one.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta, timezone, tzinfo
from typing import Any, Iterable, Sequence

from clinic.care.calc import vials_for
from clinic.care.codes import Category, ItemCode, parse_item_code
from clinic.supply.errors import SupplyInputError
from clinic.supply.poisson import poisson_quantile

# Plan item vocabulary of the care engine read here (DEVELOPERS.md, "Care engine").
CODE_POSTPARTUM_DOSE = ItemCode.POSTPARTUM_DOSE
CAT_ROUTINE, CAT_EVENT, CAT_POSTPARTUM = Category.ROUTINE, Category.EVENT, Category.POSTPARTUM
# Items whose dose is wanted now (counted on day 0); not-yet-due ones count when their window opens.
OPEN_NOW_STATES = ("due", "overdue")
# Pregnancies whose care has moved elsewhere: their doses are not this facility's demand.
GONE_STATUSES = ("transferred", "lost-to-follow-up")
# A pregnancy 14 days past its EDD (42+0) with no birth recorded is most likely a birth not
# yet entered (common practice: birth or induction by 42 weeks); it is counted on day 0 until
# then and not at all after.
POST_TERM_DAYS = 14
# The event rate looks back one year.
EVENT_LOOKBACK_DAYS = 365
DAYS_PER_WEEK = 7
_EPS = 1e-9


@dataclass(frozen=True)
class ProductKey:
    """A stocked product: its name and vial size (whole IU)."""

    name: str
    vial_iu: int


@dataclass(frozen=True)
class DoseNeed:
    """One dose a facility expects to give: on ``day`` (0 = today) with ``weight`` (1 = known)."""

    day: int
    dose_iu: int
    weight: float
    category: str          # routine, event or postpartum (the plan item's category)
    code: str
    pregnancy_id: str

    @property
    def known(self) -> bool:
        return self.weight >= 1.0


@dataclass(frozen=True)
class EventRate:
    """Event doses the engine planned at one facility in the last ``days`` days."""

    count: int
    days: int
    doses_iu: tuple[int, ...]

    @property
    def per_week(self) -> float:
        return self.count * DAYS_PER_WEEK / self.days if self.days else 0.0


@dataclass
class WeekFigures:
    week: int              # 1 = the week starting today
    start: date
    routine_vials: float
    postpartum_vials: float
    event_vials: float
    expected_vials: float
    upper_vials: int


@dataclass
class ProductForecast:
    product: ProductKey
    daily: list[float]                 # expected vials per day of the horizon
    weeks: list[WeekFigures]
    expected_vials: float
    upper_vials: int
    known_vials: int
    births_expected: float             # expected RhD-positive births given from this product
    vials_per_birth: float
    events_expected: float             # expected events over the horizon, at the observed rate
    vials_per_event: float
    events_observed: int               # of the observed events, those this product would give
    needs: list[DoseNeed] = field(default_factory=list)


# ---- reading plans ------------------------------------------------------------------------

def _a(obj: Any, name: str, default: Any = None) -> Any:
    if isinstance(obj, dict):
        return obj.get(name, default)
    return getattr(obj, name, default)


def _aware(value: Any) -> datetime | None:
    if value is None or value == "":
        return None
    if isinstance(value, datetime):
        return value if value.tzinfo else value.replace(tzinfo=timezone.utc)
    return datetime.fromisoformat(str(value).replace("Z", "+00:00"))


def needs_of_plan(plan: Any, *, pregnancy: dict, start: date, days: int, tz: tzinfo) -> list[DoseNeed]:
    """The doses one pregnancy's plan asks for within ``days`` days from local date ``start``."""
    if pregnancy.get("status") in GONE_STATUSES or pregnancy.get("voided"):
        return []
    pid = pregnancy.get("id", "")
    out = []
    for it in _a(plan, "items", []) or []:
        dose, state = _a(it, "dose_iu"), _a(it, "state")
        if not dose:
            continue
        code, cat = _a(it, "code") or "", _a(it, "category") or ""
        weight, when = 1.0, None
        if state in OPEN_NOW_STATES:
            day = 0
        elif state == "not-yet-due" and _a(it, "opens") is not None:
            when = _aware(_a(it, "opens"))
        elif state == "not-yet-due" and code == CODE_POSTPARTUM_DOSE:
            # Before the birth: the EDD, weighted by the chance that the baby is RhD positive.
            chance = _a(plan, "fetal_rhd_probability")
            weight = 1.0 if chance is None else float(chance)
            when = _aware(_a(it, "due"))
            if when is None or weight <= 0:
                continue
            lag = (start - when.astimezone(tz).date()).days
            if lag > POST_TERM_DAYS:
                continue
        else:
            continue
        if when is not None:
            day = max(0, (when.astimezone(tz).date() - start).days)
        if day >= days:
            continue
        out.append(DoseNeed(day, int(dose), weight, cat, code, pid))
    return out


def event_rate(plans_with_events: Iterable[tuple[Any, dict[str, str]]], *, facility: str, now: datetime,
               days: int = EVENT_LOOKBACK_DAYS) -> EventRate:
    """Event doses the engine planned for events recorded at ``facility`` in the ``days`` before ``now``.

    ``plans_with_events``: (plan, {event record id: facility that recorded it}) per pregnancy.
    An event counts when its ``event-dose`` item is not "not-needed" (given, due, overdue or
    missed: each was a dose the clinic needed to have).
    """
    since = now - timedelta(days=days)
    doses = []
    for plan, where in plans_with_events:
        for it in _a(plan, "items", []) or []:
            base, event_id = parse_item_code(_a(it, "code") or "")
            if base != ItemCode.EVENT_DOSE or _a(it, "state") == "not-needed":
                continue
            if where.get(_a(it, "related_id") or event_id) != facility:
                continue
            t = _aware(_a(it, "due"))
            dose = _a(it, "dose_iu")
            if t is None or not dose or not since <= t < now:
                continue
            doses.append(int(dose))
    return EventRate(len(doses), days, tuple(sorted(doses)))


# ---- products -----------------------------------------------------------------------------

def allocate(dose_iu: int, products: Sequence[ProductKey]) -> ProductKey:
    """The stocked product a dose is given from: least IU drawn, then fewest vials, then name."""
    if not products:
        raise SupplyInputError("products", "no stocked product: list the facility's products in config.toml [stock]")
    return min(products, key=lambda p: (vials_for(dose_iu, p.vial_iu) * p.vial_iu, vials_for(dose_iu, p.vial_iu),
                                        p.name, p.vial_iu))


def _ceil(x: float) -> int:
    return int(math.ceil(x - _EPS)) if x > 0 else 0


def births_quantile(q: float, chances: Sequence[float]) -> int:
    """The ``q`` quantile of the number of RhD-positive births: a Poisson of the summed chances,
    never more than the births counted (one woman gives birth once)."""
    mu = sum(chances)
    return min(poisson_quantile(q, mu), len(chances)) if mu > 0 else 0


@dataclass
class _Period:
    """Known vials, the births' and events' expectations, and the upper figure of one period."""

    known_vials: int
    births: float
    vials_per_birth: float
    events: float
    vials_per_event: float
    upper: int


def _period(needs: Sequence[DoseNeed], event_vials: Sequence[int], rate_days: int, days: int, vial_iu: int,
            q: float) -> _Period:
    known = sum(vials_for(n.dose_iu, vial_iu) for n in needs if n.known)
    chances = [n for n in needs if not n.known]
    births = sum(n.weight for n in chances)
    v_b = sum(n.weight * vials_for(n.dose_iu, vial_iu) for n in chances) / births if births else 0.0
    events = len(event_vials) * days / rate_days if rate_days else 0.0
    v_e = sum(event_vials) / len(event_vials) if event_vials else 0.0
    extra = births_quantile(q, [n.weight for n in chances]) * v_b
    if events > 0:
        extra += poisson_quantile(q, events) * v_e
    return _Period(known, births, v_b, events, v_e, _ceil(known + extra))


def forecast_products(needs: Sequence[DoseNeed], rate: EventRate, products: Sequence[ProductKey], *,
                      start: date, weeks: int, percentile: float = 90) -> list[ProductForecast]:
    """Day-by-day and week-by-week expected vials per product, and the upper figures."""
    if not isinstance(weeks, int) or not 1 <= weeks <= 52:
        raise SupplyInputError("weeks", f"{weeks!r}: allowed range 1 to 52")
    if not 50 <= percentile < 100:
        raise SupplyInputError("percentile", f"{percentile!r}: allowed range 50 to below 100")
    q = percentile / 100.0
    days = weeks * DAYS_PER_WEEK
    if not products:
        return []
    out = []
    observed = [(allocate(d, products), d) for d in rate.doses_iu]
    for prod in products:
        mine = [n for n in needs if allocate(n.dose_iu, products) == prod]
        ev = [vials_for(d, prod.vial_iu) for p, d in observed if p == prod]
        per_day_events = sum(ev) / rate.days if rate.days else 0.0
        by_cat = {c: [0.0] * days for c in (CAT_ROUTINE, CAT_POSTPARTUM)}
        by_cat[CAT_EVENT] = [per_day_events] * days
        for n in mine:
            cat = n.category if n.category in by_cat else CAT_EVENT
            by_cat[cat][n.day] += vials_for(n.dose_iu, prod.vial_iu) * n.weight
        daily = [sum(v[d] for v in by_cat.values()) for d in range(days)]
        wk = []
        for w in range(weeks):
            lo, hi = w * DAYS_PER_WEEK, (w + 1) * DAYS_PER_WEEK
            per = _period([n for n in mine if lo <= n.day < hi], ev, rate.days, DAYS_PER_WEEK, prod.vial_iu, q)
            wk.append(WeekFigures(w + 1, start + timedelta(days=lo), sum(by_cat[CAT_ROUTINE][lo:hi]),
                                  sum(by_cat[CAT_POSTPARTUM][lo:hi]), sum(by_cat[CAT_EVENT][lo:hi]),
                                  sum(daily[lo:hi]), per.upper))
        tot = _period(mine, ev, rate.days, days, prod.vial_iu, q)
        out.append(ProductForecast(prod, daily, wk, sum(daily), tot.upper, tot.known_vials, tot.births,
                                   tot.vials_per_birth, tot.events, tot.vials_per_event, len(ev), mine))
    return out
