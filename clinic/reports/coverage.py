"""The monthly coverage report: indicators computed from records and the care engine's plans.

Pure: no Flask, no TinyDB. Input is a list of ``Case`` (one pregnancy: woman, pregnancy,
entries and the care engine's ``Plan`` for it) and the stock records; output is a
``MonthReport`` that the ``render_*`` modules format.

Every eligibility and timing decision is read from the plan: an item's ``state``
(``not-needed`` means not eligible), ``closes`` (the window's hard end), ``timeliness``
(``on-time`` / ``late``), ``done_at``, and the plan's ``rhd.managed_as``. This module only
counts: which month a thing falls in (local time in the district's time zone), and who is
in a numerator or a denominator. It never recomputes a clinical rule.

Attribution: a pregnancy counts once, for the facility that created its pregnancy record
(where she booked), even when records of her come from two clinics' bundles. Follow-up
lists also show the facility that saw her last.
"""
from __future__ import annotations

from collections import Counter, defaultdict
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone, tzinfo
from typing import Any, Callable, Iterable

from clinic.records.schema import IU_PER_UG
from clinic.records.values import parse_utc
from clinic.reports.month import Month, percentage
from clinic.reports.stock import EXPIRY_WARNING_DAYS

DISTRICT = "*district*"
CAUTION = ("These numbers are only as complete as the data entered: a typing, screen or dose "
           "given but not recorded counts as missed, and a woman not entered is not counted at all.")
NULL_PERCENT = "A percentage is left empty when its denominator is 0 (nothing to measure), never shown as 0 %."
ATTRIBUTION = ("Each pregnancy counts once, for the facility that created its pregnancy record "
               "(where she booked), even when her records arrive in bundles from two clinics; "
               "follow-up lists also name the facility that saw her last.")
TIME_ZONE_NOTE = "Months run from local midnight on the 1st to local midnight on the 1st of the next month."

# Item codes and categories of the care engine that the report reads (DEVELOPERS.md,
# "Care engine"). Only these names couple the report to the engine.
CAT_TYPING, CAT_SCREEN, CAT_ROUTINE, CAT_EVENT, CAT_POSTPARTUM, CAT_BIRTH = (
    "typing", "screen", "routine", "event", "postpartum", "birth")
CODE_MATERNAL_TYPING = "booking-typing"
CODE_BOOKING_SCREEN = "booking-screen"
EVENT_DOSE_PREFIX = "event-dose:"
CODE_POSTPARTUM_DOSE = "postpartum-dose"
CODE_POSTPARTUM_FMH = "postpartum-fmh"
CODE_CORD_TYPING = "cord-typing"
CODE_PARTNER_TYPING = "partner-typing"
CODE_FETAL_RHD_TEST = "fetal-rhd-test"
ALERT_IMMUNE_ANTI_D = "immune-anti-d"


class ReportError(ValueError):
    """The report cannot be made from these inputs (say which and why)."""


# ---- reading the engine's plan ------------------------------------------------------

def _a(obj: Any, name: str, default: Any = None) -> Any:
    """An attribute of an engine object (or a key of its to_dict() form)."""
    if isinstance(obj, dict):
        return obj.get(name, default)
    return getattr(obj, name, default)


def _dt(value: Any) -> datetime | None:
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

    def __post_init__(self):
        if not self.facility:
            self.facility = self.pregnancy.get("facility", "")
        if not self.last_facility:
            latest = max(self.entries + [self.pregnancy], key=lambda r: r.get("created_at") or "")
            self.last_facility = latest.get("facility", self.facility)
        self._items = list(_a(self.plan, "items", []) or [])
        self._by_code = {}
        self._by_cat: dict[str, list] = defaultdict(list)
        for it in self._items:
            self._by_code.setdefault(_a(it, "code"), it)
            self._by_cat[_a(it, "category")].append(it)
        self._by_kind: dict[str, list[dict]] = defaultdict(list)
        for e in self.entries:
            self._by_kind[e.get("kind")].append(e)
        self._months: dict = {}

    def months(self, tz: tzinfo) -> frozenset:
        """Every month this pregnancy can count in: the months of its booking, of each item's
        deadline, and of each dated entry (a cheap filter; the indicators decide)."""
        key = str(tz)
        if key not in self._months:
            out = set()
            if self.pregnancy.get("booked_on"):
                out.add(Month.parse(self.pregnancy["booked_on"][:7]))
            for it in self._items:
                c = _dt(_a(it, "closes"))
                if c is not None:
                    out.add(Month.of(c - _EPS, tz))
            for e in self.entries:
                for k in _ENTRY_TIMES:
                    if e.get(k):
                        out.add(Month.of(parse_utc(e[k]), tz))
            self._months[key] = frozenset(out)
        return self._months[key]

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
        return _a(_a(self.plan, "rhd"), "managed_as")

    def alerts_with(self, code: str) -> list:
        return [a for a in (_a(self.plan, "alerts", []) or []) if _a(a, "code") == code]

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
    return item is not None and _a(item, "state") != "not-needed"


def done(item) -> bool:
    return item is not None and _a(item, "state") == "done"


OPEN_STATES = ("due", "not-yet-due")
OPEN_FOLLOW_UP = "deadline still open when the report was made: give it before the deadline"


def outcome_of(item) -> str:
    """on-time / late (the engine's timeliness) for a done item; "open" when the engine still
    has it due (its deadline had not passed when the report was made); else not-given."""
    if done(item):
        t = _a(item, "timeliness")
        return t if t in ("on-time", "late") else "given"
    if _a(item, "state") in OPEN_STATES:
        return "open"
    return "not-given"


# ---- indicators ---------------------------------------------------------------------

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


def indicator(id, section, title, definition, numerator, denominator):
    def deco(fn):
        INDICATORS.append(Indicator(id, section, title, definition, numerator, denominator, fn))
        return fn
    return deco


def indicator_by_id(ind_id: str) -> Indicator:
    for ind in INDICATORS:
        if ind.id == ind_id:
            return ind
    raise KeyError(ind_id)


def _booked_in(case: Case, month: Month) -> bool:
    return month.contains_date(case.pregnancy.get("booked_on"))


def _booking_due(case: Case, tz: tzinfo) -> datetime:
    d = case.pregnancy["booked_on"]
    return datetime.fromisoformat(d).replace(tzinfo=tz).astimezone(timezone.utc)


S_BOOK = "Booking and typing"
S_NEG = "RhD-negative women at booking"
S_ROUTINE = "Routine antenatal prophylaxis"
S_EVENT = "Sensitising events"
S_BIRTH = "Births to RhD-negative women"
S_OUTCOME = "Outcome: new immune sensitisations"
S_USE = "Anti-D used"


@indicator("bookings", S_BOOK, "Bookings",
           "Pregnancies whose booking date falls in the month.",
           "pregnancies booked in the month", None)
def _bookings(case, month, tz):
    if _booked_in(case, month):
        yield Hit(case, True, "booked", due=_booking_due(case, tz))


@indicator("typed_at_booking", S_BOOK, "RhD typed at booking",
           "Of the pregnancies booked in the month, those whose maternal ABO/RhD typing the care "
           "engine counts as done (a valid result recorded for this pregnancy).",
           "booked and typed", "pregnancies booked in the month")
def _typed(case, month, tz):
    if not _booked_in(case, month):
        return
    it = case.item(CODE_MATERNAL_TYPING)
    ok = done(it)
    yield Hit(case, ok, "typed" if ok else "not-typed",
              None if ok else "RhD typing not recorded", CODE_MATERNAL_TYPING, _booking_due(case, tz))


@indicator("rhd_negative_share", S_BOOK, "RhD-negative among those typed",
           "Of the pregnancies booked in the month and typed, those the care engine manages as "
           "RhD negative (including D variants the profile manages as negative).",
           "managed as RhD negative", "booked in the month and typed")
def _neg_share(case, month, tz):
    if not _booked_in(case, month) or not done(case.item(CODE_MATERNAL_TYPING)):
        return
    yield Hit(case, case.managed_as == "negative", case.managed_as or "")


def _neg_booked(case, month):
    return _booked_in(case, month) and case.managed_as == "negative"


@indicator("neg_screen_at_booking", S_NEG, "Antibody screen at booking",
           "Of the RhD-negative women booked in the month, those whose booking antibody screen "
           "the care engine counts as done.",
           "screened at booking", "RhD-negative women booked in the month")
def _neg_screen(case, month, tz):
    if not _neg_booked(case, month):
        return
    it = case.item(CODE_BOOKING_SCREEN)
    ok = done(it)
    yield Hit(case, ok, "screened" if ok else "not-screened",
              None if ok else "booking antibody screen not recorded", CODE_BOOKING_SCREEN,
              _dt(_a(it, "closes")) or _booking_due(case, tz))


@indicator("neg_partner_typed", S_NEG, "Partner typed",
           "Of the RhD-negative women booked in the month for whom the care engine plans partner "
           "typing (its 'partner-typing' item, not 'not needed'), those whose item the engine counts "
           "as done (the baby's father's RhD recorded as positive or negative).",
           "partner RhD known", "RhD-negative women booked in the month (partner typing planned)")
def _partner(case, month, tz):
    it = case.item(CODE_PARTNER_TYPING)
    if not _neg_booked(case, month) or not eligible(it):
        return
    ok = done(it)
    yield Hit(case, ok, "partner-typed" if ok else "partner-not-typed", None, CODE_PARTNER_TYPING,
              _dt(_a(it, "closes")) or _booking_due(case, tz), _a(it, "done_record_id"))


@indicator("neg_fetal_rhd", S_NEG, "Fetal RHD tested (where used)",
           "Of the RhD-negative women booked in the month for whom the care engine plans a cell-free "
           "fetal RHD test (its 'fetal-rhd-test' item, not 'not needed': the profile uses targeted "
           "prophylaxis), those whose test the engine counts as done. Empty where the profile does "
           "not use the test.",
           "fetal RHD result recorded", "RhD-negative women booked in the month (fetal RHD test planned)")
def _fetal(case, month, tz):
    it = case.item(CODE_FETAL_RHD_TEST)
    if not _neg_booked(case, month) or not eligible(it):
        return
    ok = done(it)
    yield Hit(case, ok, "tested" if ok else "not-tested", None, CODE_FETAL_RHD_TEST, _booking_due(case, tz),
              _a(it, "done_record_id"))


def closed_in(month: Month, closes: datetime | None, tz: tzinfo) -> bool:
    """A window closes in the month when its last moment does: the engine's ``closes`` is the
    deadline itself (often the next local midnight), so a window ending with 30 November
    (closes = 1 December 00:00 local) closed in November."""
    return closes is not None and month.start(tz) < closes <= month.end(tz)


def _routine_hits(case, month, tz):
    for it in case.items_of(CAT_ROUTINE):
        if eligible(it) and closed_in(month, _dt(_a(it, "closes")), tz):
            yield it


_ROUTINE_DEN = "eligible routine doses whose window closed in the month"
_ROUTINE_DEF = ("Routine doses the care engine plans for the woman (not 'not needed') whose window "
                "closed in the month (the item's 'closes'; a window ending with the last day of the "
                "month closed in that month); a two-dose profile counts each dose in the month its "
                "own window closes. ")


@indicator("routine_on_time", S_ROUTINE, "Routine dose given inside the window",
           _ROUTINE_DEF + "Numerator: the engine judges the dose given on time.",
           "given inside the window", _ROUTINE_DEN)
def _routine_on_time(case, month, tz):
    for it in _routine_hits(case, month, tz):
        o = outcome_of(it)
        yield Hit(case, o == "on-time", o, None, _a(it, "code"), _dt(_a(it, "closes")))


@indicator("routine_late", S_ROUTINE, "Routine dose given late",
           _ROUTINE_DEF + "Numerator: the engine judges the dose given, but late.",
           "given late", _ROUTINE_DEN)
def _routine_late(case, month, tz):
    for it in _routine_hits(case, month, tz):
        o = outcome_of(it)
        yield Hit(case, o == "late", o, None, _a(it, "code"), _dt(_a(it, "closes")))


@indicator("routine_not_given", S_ROUTINE, "Routine dose not given",
           _ROUTINE_DEF + "Numerator: no dose recorded for the item (follow-up list); a dose whose "
           "deadline had not passed when the report was made is listed for follow-up but not counted.",
           "not given", _ROUTINE_DEN)
def _routine_missed(case, month, tz):
    for it in _routine_hits(case, month, tz):
        o = outcome_of(it)
        miss = o == "not-given"
        follow = (f"{_a(it, 'title') or _a(it, 'code')} not given" if miss
                  else f"{_a(it, 'title') or _a(it, 'code')}: {OPEN_FOLLOW_UP}" if o == "open" else None)
        yield Hit(case, miss, o, follow,
                  _a(it, "code"), _dt(_a(it, "closes")))


@indicator("routine_both_doses", S_ROUTINE, "Both routine doses (two-dose profiles)",
           "Women for whom the engine plans two or more routine doses and whose last routine "
           "window closed in the month; numerator: every routine dose given (on time or late).",
           "all routine doses given", "women with two routine doses, last window closed in the month")
def _routine_both(case, month, tz):
    items = [it for it in case.items_of(CAT_ROUTINE) if eligible(it)]
    if len(items) < 2:
        return
    last = max(items, key=lambda it: _dt(_a(it, "closes")) or datetime.min.replace(tzinfo=timezone.utc))
    if not closed_in(month, _dt(_a(last, "closes")), tz):
        return
    ok = all(done(it) for it in items)
    yield Hit(case, ok, "both" if ok else "incomplete", None, _a(last, "code"), _dt(_a(last, "closes")))


def _event_hits(case, month, tz):
    for it in case.items_of(CAT_EVENT):
        if not str(_a(it, "code")).startswith(EVENT_DOSE_PREFIX) or not eligible(it):
            continue
        ev = case.entry(_a(it, "related_id"))
        if ev is None:
            raise ReportError(f"care plan item {_a(it, 'code')} of pregnancy {case.id} names event "
                              f"{_a(it, 'related_id')!r}, which is not among its records")
        at = parse_utc(ev["occurred_at"])
        if month.contains(at, tz):
            yield it, ev, at


_EVENT_DEN = "sensitising events in the month needing anti-D"
_EVENT_DEF = ("Sensitising events that happened in the month for which the care engine plans an "
              "anti-D dose (the woman is eligible). ")


@indicator("event_on_time", S_EVENT, "Event dose within 72 h",
           _EVENT_DEF + "Numerator: the engine judges the dose on time (inside its window, 72 h in "
           "the usual profiles).", "dose on time", _EVENT_DEN)
def _event_on_time(case, month, tz):
    for it, ev, at in _event_hits(case, month, tz):
        o = outcome_of(it)
        yield Hit(case, o == "on-time", o, None, _a(it, "code"), _dt(_a(it, "closes")), ev["id"],
                  {"event": ev.get("event_kind")})


@indicator("event_late", S_EVENT, "Event dose late",
           _EVENT_DEF + "Numerator: dose given after the window (the engine's 'late').",
           "dose late", _EVENT_DEN)
def _event_late(case, month, tz):
    for it, ev, at in _event_hits(case, month, tz):
        o = outcome_of(it)
        yield Hit(case, o == "late", o, None, _a(it, "code"), _dt(_a(it, "closes")), ev["id"],
                  {"event": ev.get("event_kind")})


@indicator("event_none", S_EVENT, "Event without a dose",
           _EVENT_DEF + "Numerator: no dose recorded for the event and its deadline passed (follow-up "
           "list); a dose whose 72 hours were still running when the report was made is listed for "
           "follow-up but not counted.",
           "no dose", _EVENT_DEN)
def _event_none(case, month, tz):
    for it, ev, at in _event_hits(case, month, tz):
        o = outcome_of(it)
        miss = o == "not-given"
        follow = (f"no anti-D after {ev.get('event_kind')}" if miss
                  else f"anti-D after {ev.get('event_kind')}: {OPEN_FOLLOW_UP}" if o == "open" else None)
        yield Hit(case, miss, o, follow,
                  _a(it, "code"), _dt(_a(it, "closes")), ev["id"], {"event": ev.get("event_kind")})


def _birth_in(case, month, tz):
    """The first birth record of an RhD-negative woman, if it falls in the month."""
    if case.managed_as != "negative":
        return None
    births = case.births()
    if births and month.contains(parse_utc(births[0]["born_at"]), tz):
        return births[0]
    return None


@indicator("births_neg", S_BIRTH, "Births to RhD-negative women",
           "Pregnancies of women the engine manages as RhD negative whose (first) birth is in the month.",
           "births", None)
def _births(case, month, tz):
    b = _birth_in(case, month, tz)
    if b is not None:
        yield Hit(case, True, "born", due=parse_utc(b["born_at"]), record_id=b["id"])


@indicator("cord_typed", S_BIRTH, "Cord blood typed",
           "Of the births to RhD-negative women in the month, those whose cord-blood typing the "
           "care engine counts as done (every baby's RhD recorded as positive or negative).",
           "baby RhD recorded", "births to RhD-negative women in the month")
def _cord(case, month, tz):
    b = _birth_in(case, month, tz)
    if b is None:
        return
    it = case.item(CODE_CORD_TYPING)
    ok = done(it)
    yield Hit(case, ok, "typed" if ok else "not-typed", None if ok else "baby's RhD not recorded",
              CODE_CORD_TYPING, parse_utc(b["born_at"]), b["id"])


def _pp_outcome(it) -> str:
    """on-time, late (inside the engine's late window), after-window, or not-given."""
    o = outcome_of(it)
    if o == "late":
        done_at, late_until = _dt(_a(it, "done_at")), _dt(_a(it, "late_until"))
        if done_at is not None and late_until is not None and done_at > late_until:
            return "after-window"
    return o


def _postpartum_hit(case, month, tz):
    b = _birth_in(case, month, tz)
    it = case.item(CODE_POSTPARTUM_DOSE)
    if b is None or not eligible(it):
        return None
    return it, b


_PP_DEN = "births to RhD-negative women in the month needing a postpartum dose"
_PP_DEF = ("Births in the month to RhD-negative women for whom the care engine plans a postpartum "
           "dose (baby RhD positive, or not known). ")


@indicator("postpartum_on_time", S_BIRTH, "Postpartum dose within 72 h",
           _PP_DEF + "Numerator: the engine judges the dose on time (72 h after the birth in the "
           "usual profiles).", "dose on time", _PP_DEN)
def _pp_on_time(case, month, tz):
    h = _postpartum_hit(case, month, tz)
    if h:
        it, b = h
        o = _pp_outcome(it)
        yield Hit(case, o == "on-time", o, None, CODE_POSTPARTUM_DOSE, _dt(_a(it, "closes")), b["id"])


@indicator("postpartum_late", S_BIRTH, "Postpartum dose late (inside the late window)",
           _PP_DEF + "Numerator: given after 72 h but inside the profile's late window (the engine's "
           "'late').", "dose late", _PP_DEN)
def _pp_late(case, month, tz):
    h = _postpartum_hit(case, month, tz)
    if h:
        it, b = h
        o = _pp_outcome(it)
        yield Hit(case, o == "late", o, None, CODE_POSTPARTUM_DOSE, _dt(_a(it, "closes")), b["id"])


@indicator("postpartum_missed", S_BIRTH, "Postpartum dose missed",
           _PP_DEF + "Numerator: no dose inside the late window (no dose recorded: follow-up list, still "
           "worth giving while the engine's late window is open; or a dose after the window). A birth "
           "whose 72 hours were still running when the report was made is listed but not counted.",
           "missed", _PP_DEN)
def _pp_missed(case, month, tz):
    h = _postpartum_hit(case, month, tz)
    if h:
        it, b = h
        o = _pp_outcome(it)
        miss = o in ("not-given", "after-window")
        follow = ("postpartum anti-D not given" if o == "not-given"
                  else f"postpartum anti-D: {OPEN_FOLLOW_UP}" if o == "open" else None)
        yield Hit(case, miss, o, follow,
                  CODE_POSTPARTUM_DOSE, _dt(_a(it, "closes")), b["id"],
                  {"late_until": _a(it, "late_until"), "state": _a(it, "state")})


@indicator("postpartum_fmh", S_BIRTH, "FMH tested (where the profile requires it)",
           "Births in the month to RhD-negative women for whom the care engine plans a "
           "postpartum FMH test; numerator: the test done.",
           "FMH tested", "births needing an FMH test")
def _pp_fmh(case, month, tz):
    b = _birth_in(case, month, tz)
    it = case.item(CODE_POSTPARTUM_FMH)
    if b is None or not eligible(it):
        return
    ok = done(it)
    yield Hit(case, ok, "tested" if ok else "not-tested",
              None if ok else "postpartum FMH test not recorded", CODE_POSTPARTUM_FMH,
              _dt(_a(it, "closes")), b["id"])


def _first_immune_anti_d(case) -> dict | None:
    """The first screen the care engine judged immune anti-D (its 'immune-anti-d' alert names
    the screens), or None. The engine judges it, not the laboratory's field alone."""
    screens = []
    for a in case.alerts_with(ALERT_IMMUNE_ANTI_D):
        for rid in _a(a, "record_ids") or []:
            s = case.entry(rid)
            if s is None or not s.get("sampled_at"):
                raise ReportError(f"care plan alert {ALERT_IMMUNE_ANTI_D} of pregnancy {case.id} names screen "
                                  f"{rid!r}, which is not among its records")
            screens.append(s)
    return min(screens, key=lambda s: (s["sampled_at"], s["id"])) if screens else None


def prophylaxis_history(case, before: datetime) -> list[dict]:
    """Anti-D doses of this pregnancy given before ``before`` (for the sensitisation list)."""
    out = []
    for d in sorted(case.of_kind("dose"), key=lambda d: d["given_at"]):
        if parse_utc(d["given_at"]) < before:
            out.append({"given_at": d["given_at"], "dose_iu": d.get("dose_iu"),
                        "indication": d.get("indication"), "lot": d.get("lot")})
    return out


@indicator("new_sensitisations", S_OUTCOME, "New immune anti-D found",
           "Pregnancies whose first antibody screen showing anti-D that the care engine judges "
           "immune (its 'immune-anti-d' alert: the laboratory's judgement where recorded, otherwise "
           "the engine's from the level and the doses given before) was sampled in the month. Each is listed with the anti-D doses "
           "of the pregnancy before it and the earlier anti-D history as recorded at booking.",
           "new immune sensitisations", None)
def _new_sens(case, month, tz):
    s = _first_immune_anti_d(case)
    if s is None:
        return
    at = parse_utc(s["sampled_at"])
    if month.contains(at, tz):
        yield Hit(case, True, "immune anti-D", "new immune anti-D: refer for surveillance", None, at,
                  s["id"], {"titre": s.get("titre"), "doses_before": prophylaxis_history(case, at),
                            "prior_anti_d": case.pregnancy.get("prior_anti_d", ""),
                            "prior_sensitising": case.pregnancy.get("prior_sensitising", "")})


@indicator("antid_doses", S_USE, "Anti-D doses given",
           "Anti-D doses recorded as given in the month (any indication).", "doses", None)
def _doses(case, month, tz):
    for d in case.of_kind("dose"):
        at = parse_utc(d["given_at"])
        if month.contains(at, tz):
            yield Hit(case, True, d.get("indication", ""), due=at, record_id=d["id"])


# ---- the report ---------------------------------------------------------------------

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


@dataclass
class UsageRow:
    facility: str
    by: str           # "indication" or "lot"
    key: str
    doses: int
    iu: int

    @property
    def ug(self) -> float:
        return self.iu / IU_PER_UG


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
    from clinic.reports.stock import balances

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
    usage: dict[tuple[str, str, str], list[int]] = defaultdict(lambda: [0, 0])
    members: set[str] = set()
    for case in cases:
        if month not in case.months(tz):
            continue
        for ind in INDICATORS:
            for hit in ind.fn(case, month, tz):
                members.add(case.id)
                for f in (case.facility, DISTRICT):
                    c = cells[(f, ind.id)]
                    c.outcomes[hit.outcome] += 1
                    if hit.in_numerator:
                        c.numerator += 1
                    if not ind.is_count:
                        c.denominator += 1
                if with_lists and hit.follow_up:
                    fu = FollowUp(ind.id, case.facility, case.last_facility, case.woman["id"], case.id,
                                  hit.follow_up, hit.outcome, hit.item_code, hit.due, hit.record_id,
                                  hit.detail)
                    (sens if ind.id == "new_sensitisations" else follow).append(fu)
        for d in case.of_kind("dose"):
            if month.contains(parse_utc(d["given_at"]), tz):
                for f in (case.facility, DISTRICT):
                    for by, key in (("indication", d.get("indication", "")), ("lot", d.get("lot", ""))):
                        u = usage[(f, by, key)]
                        u[0] += 1
                        u[1] += int(d.get("dose_iu") or 0)
    follow.sort(key=lambda x: (x.facility, x.indicator, x.due or now, x.pregnancy_id))
    sens.sort(key=lambda x: (x.facility, x.due or now))
    usage_rows = [UsageRow(f, by, key, n, iu) for (f, by, key), (n, iu) in sorted(usage.items())]
    stock = balances(stock_records, at=month.end(tz), warn_days=EXPIRY_WARNING_DAYS,
                     day=month.last_day) if with_lists else []
    return MonthReport(month, str(getattr(tz, "key", tz)), fac_list, cells, follow, sens, usage_rows,
                       stock, now, profile, dict(facility_names or {}), dict(profiles or {}), members)


def compute_trend(cases: list[Case], month: Month, tz: tzinfo, *, now: datetime, months: int = 12,
                  facilities: Iterable[str] = ()) -> dict[Month, MonthReport]:
    """Reports (counts only, no lists) for the ``months`` months ending with ``month``."""
    return {m: compute_month(cases, m, tz, now=now, facilities=facilities, with_lists=False)
            for m in month.trend(months)}

