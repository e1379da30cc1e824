"""Plans made once and kept while they stay right: a plan is reused for a later ``now`` for as
long as every comparison the care engine made with ``now`` would come out the same.

A plan is a function of the pregnancy's records, the profile and care context, and ``now``.
The first two are the cache key (a hash of the records' content, and of the planner). For
``now``, the engine is handed a stand-in (``_Now``, a ``datetime`` that is the same instant) that
notes each time the engine compares it, or a time derived from it (``now + SKEW``), with another
time: ``now < closes`` stays true until ``closes``, so the plan holds until the earliest such
turning point (``PlanEntry.until``). Anything else the engine reads from ``now`` (its calendar
day, its hour, text made from it, a difference of times) either bounds the plan to the next
local midnight, the next hour, or to this very instant (never reused). One read is known and
undone on reuse: the plan's ``dating.ga_days`` / ``ga`` (today's gestational age), which
``rebased`` works out again for the new ``now`` with the engine's own ``Dating.ga_days``; and the
plan's ``now`` itself is replaced. Every other value of a reused plan is the engine's own.
``tests/reports/test_plan_cache.py`` checks a reused plan against a fresh one over many
histories and times.

Reused plans are shared between callers: read them, never change them.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import sys
import threading
from collections import OrderedDict
from dataclasses import dataclass
from datetime import date, datetime, time, timedelta, timezone
from typing import Any, Callable

from clinic.care import plan_pregnancy
from clinic.care.dating import Dating, local_date
from clinic.care.model import Plan
from clinic.records.values import format_ga

TICK = timedelta(microseconds=1)
_NEVER = datetime.max.replace(tzinfo=timezone.utc)
_active = threading.local()


class _Recorder:
    """Turning points of one planning: the earliest ``now`` at which some answer would change."""

    def __init__(self, base: datetime):
        self.base = base
        self.until: datetime | None = None
        self.ga_read = False
        self.why = ""

    def bound(self, at: datetime, why: str) -> None:
        if at <= self.base:
            at = self.base + TICK   # the plan is right for this instant only
        if self.until is None or at < self.until:
            self.until, self.why = at, why


def _rec() -> _Recorder | None:
    """The recorder of the planning under way; None inside our own bookkeeping, and while the
    time-zone code reads a ``_Now`` to convert it (an instant kept, not a use by the engine)."""
    if getattr(_active, "busy", False):
        return None
    return getattr(_active, "rec", None)


def _quiet(fn: Callable, *args):
    """``fn(*args)`` with recording paused."""
    was = getattr(_active, "busy", False)
    _active.busy = True
    try:
        return fn(*args)
    finally:
        _active.busy = was


def _offset(p: datetime) -> timedelta:
    rec = getattr(_active, "rec", None)
    return _quiet(datetime.__sub__, p, rec.base) if rec is not None else timedelta(0)


def _compare(p: datetime, other: Any, op: Callable, name: str):
    rec = _rec()
    result = _quiet(op, p, other)
    if rec is None or result is NotImplemented or not isinstance(other, datetime) or isinstance(other, _Now):
        return result   # two times both made from now move together: no turning point
    b = _quiet(datetime.__sub__, other, _offset(p))  # the now at which p meets other
    if name == "lt":
        flips = b if result else None
    elif name == "le":
        flips = b + TICK if result else None
    elif name == "gt":
        flips = None if result else b + TICK
    elif name == "ge":
        flips = None if result else b
    else:  # eq, ne
        flips = rec.base + TICK if (result if name == "eq" else not result) else (b if b > rec.base else None)
    if flips is not None:
        rec.bound(flips, f"now {name} {other.isoformat()}")
    return result


def _plain(p: datetime) -> datetime:
    """The same instant as a plain datetime (arithmetic on a ``_Now`` gives a ``_Now``)."""
    return _quiet(lambda: datetime.combine(datetime.date(p), datetime.timetz(p)))


def _escape(p: datetime, kind: str) -> None:
    """``now`` was read other than by comparison; bound the plan accordingly."""
    rec = _rec()
    if rec is None:
        return
    _active.busy = True
    try:
        _bound_escape(rec, p, kind)
    finally:
        _active.busy = False


def _bound_escape(rec: _Recorder, p: datetime, kind: str) -> None:
    local = _plain(p)  # p in its own zone: its day and hour are the ones that were read
    if kind == "day":
        nxt = datetime.combine(local.date() + timedelta(days=1), time(0), tzinfo=p.tzinfo)
        rec.bound(nxt - _offset(p), "the calendar day of now was read")
    elif kind == "hour":
        nxt = local.replace(minute=0, second=0, microsecond=0) + timedelta(hours=1)
        rec.bound(nxt - _offset(p), "the hour of now was read")
    else:
        rec.bound(rec.base, f"now was read ({kind})")


def _is_ga_now() -> bool:
    """Is this ``date()`` the one ``plan._run`` makes for today's GA (``Dating.ga_days(now)``)?"""
    from clinic.care import plan as plan_module

    f = sys._getframe(2)
    return (f.f_code is local_date.__code__ and f.f_back is not None
            and f.f_back.f_code is Dating.ga_days.__code__ and f.f_back.f_back is not None
            and f.f_back.f_back.f_code is plan_module._run.__code__)


def _day_property(name: str):
    getter = getattr(datetime, name).__get__

    def read(self):
        _escape(self, "day")
        return _quiet(getter, self)
    return property(read)


class _Now(datetime):
    """``now`` as the engine sees it while a plan is made: the same instant, its uses noted."""

    __slots__ = ()

    def __lt__(self, other):
        return _compare(self, other, datetime.__lt__, "lt")

    def __le__(self, other):
        return _compare(self, other, datetime.__le__, "le")

    def __gt__(self, other):
        return _compare(self, other, datetime.__gt__, "gt")

    def __ge__(self, other):
        return _compare(self, other, datetime.__ge__, "ge")

    def __eq__(self, other):
        return _compare(self, other, datetime.__eq__, "eq")

    def __ne__(self, other):
        return _compare(self, other, datetime.__ne__, "ne")

    def __hash__(self):
        _escape(self, "hash")
        return _quiet(datetime.__hash__, self)

    def __sub__(self, other):
        if isinstance(other, (datetime, date)) and not isinstance(other, _Now):
            _escape(self, "a difference of times")
        return _quiet(datetime.__sub__, self, other)

    def __rsub__(self, other):
        if isinstance(other, (datetime, date)):
            _escape(self, "a difference of times")
        return _quiet(datetime.__rsub__, self, other)

    def __add__(self, other):
        return _quiet(datetime.__add__, self, other)

    def __radd__(self, other):
        return _quiet(datetime.__radd__, self, other)

    def astimezone(self, tz=None):
        return _quiet(datetime.astimezone, self, tz)

    def replace(self, *a, **kw):
        _escape(self, "replace")
        return _quiet(lambda: datetime.replace(self, *a, **kw))

    def date(self):
        rec = _rec()
        if rec is not None and _is_ga_now():
            rec.ga_read = True
        else:
            _escape(self, "day")
        return _quiet(datetime.date, self)

    year = _day_property("year")
    month = _day_property("month")
    day = _day_property("day")

    @property
    def hour(self):
        _escape(self, "hour")
        return _quiet(datetime.hour.__get__, self)

    def toordinal(self):
        _escape(self, "day")
        return _quiet(datetime.toordinal, self)

    def weekday(self):
        _escape(self, "day")
        return _quiet(datetime.weekday, self)

    def isoweekday(self):
        _escape(self, "day")
        return _quiet(datetime.isoweekday, self)

    def isocalendar(self):
        _escape(self, "day")
        return _quiet(datetime.isocalendar, self)


def _exact(name: str):
    base = getattr(datetime, name)

    def read(self, *a, **kw):
        _escape(self, name)
        return _quiet(lambda: base(self, *a, **kw))
    read.__name__ = name
    return read


for _name in ("timestamp", "timetuple", "utctimetuple", "strftime", "isoformat", "ctime", "__str__",
              "__format__", "time", "timetz", "utcoffset", "dst", "tzname", "__reduce__", "__reduce_ex__"):
    setattr(_Now, _name, _exact(_name))
for _name in ("minute", "second", "microsecond", "fold"):
    setattr(_Now, _name, property(lambda self, _n=_name: (_escape(self, _n),
                                                         _quiet(getattr(datetime, _n).__get__, self))[1]))


def _probe(now: datetime) -> _Now:
    u = now.astimezone(timezone.utc)
    return _Now(u.year, u.month, u.day, u.hour, u.minute, u.second, u.microsecond, tzinfo=timezone.utc)


_LEAVES = frozenset({str, int, float, bool, type(None), date, datetime, timedelta})


def _holds_probe(value: Any) -> bool:
    """Does a made plan keep a time made from ``now`` anywhere but ``Plan.now``? (Every object
    reachable from it is looked at; plain values end the walk.)"""
    stack, seen = [value], set()
    while stack:
        v = stack.pop()
        t = type(v)
        if t is _Now:
            return True
        if t in _LEAVES or id(v) in seen:
            continue
        seen.add(id(v))
        if t is dict:
            stack.extend(v.values())
        elif t in (list, tuple, set, frozenset):
            stack.extend(v)
        elif hasattr(v, "__dict__"):
            stack.extend(vars(v).values())
        elif hasattr(v, "__slots__"):
            stack.extend(getattr(v, n) for n in v.__slots__ if hasattr(v, n))
    return False


@dataclass
class PlanEntry:
    """A made plan and the times of ``now`` it is right for: ``since`` <= now < ``until``."""

    plan: Plan
    since: datetime
    until: datetime
    why: str
    tz: Any

    def holds(self, now: datetime) -> bool:
        return self.since <= now < self.until


def _watched(now: datetime, fn: Callable[[datetime], Any]) -> tuple[Any, _Recorder]:
    base = now.astimezone(timezone.utc)
    rec = _Recorder(base)
    _active.rec = rec
    try:
        return fn(_probe(base)), rec
    finally:
        _active.rec = None


def watch(now: datetime, fn: Callable[[datetime], Any]) -> tuple[Any, datetime, str]:
    """``fn(now)`` with ``now`` watched: (its result, the first later now that could change it, why)."""
    result, rec = _watched(now, fn)
    return result, rec.until or _NEVER, rec.why or "no turning point"


def plan_for_now(woman: dict, pregnancy: dict, entries: list[dict], *, now: datetime, profile, context) -> PlanEntry:
    """``plan_pregnancy`` at ``now``, and until when that plan stays right."""
    return entry_for(now, lambda n: plan_pregnancy(woman, pregnancy, entries, now=n, profile=profile,
                                                    context=context), context.tz)


def entry_for(now: datetime, make: Callable[[datetime], Plan], tz) -> PlanEntry:
    """The plan ``make(now)`` returns, and until when it stays right (``make`` may plan more than
    one pregnancy, an earlier one of the woman say: every use of ``now`` in it counts)."""
    plan, rec = _watched(now, make)
    base = rec.base
    plan = dataclasses.replace(plan, now=base)
    if _holds_probe(plan):
        rec.bound(base, "the plan keeps a time made from now")
    return PlanEntry(plan, base, rec.until or _NEVER, rec.why or "no turning point", tz)


def rebased(entry: PlanEntry, now: datetime) -> Plan:
    """The entry's plan as ``plan_pregnancy`` would make it at ``now`` (``entry.holds(now)``)."""
    now = now.astimezone(timezone.utc)
    plan = entry.plan
    if now == plan.now:
        return plan
    dating = plan.dating
    if dating.get("edd") is not None and "ga_days" in dating:
        ga = Dating(dating["edd"], dating["method"], dating["reason"], dating["source"]).ga_days(now, entry.tz)
        dating = {**dating, "ga_days": ga, "ga": format_ga(ga)}
    return dataclasses.replace(plan, now=now, dating=dating)


def content_key(woman: dict, pregnancy: dict, entries: list[dict]) -> str:
    """A hash of everything the plan reads from the records (every field, envelope included)."""
    blob = json.dumps([woman, pregnancy, entries], sort_keys=True, ensure_ascii=False, separators=(",", ":"),
                      default=str)
    return hashlib.blake2b(blob.encode("utf-8"), digest_size=16).hexdigest()


def planner_key(profile, context) -> str:
    """What else a plan depends on: the profile as loaded (overrides applied) and the care context."""
    key = getattr(profile, "_rhledger_cache_key", None)
    if key is None:
        data = getattr(profile, "data", None)
        blob = json.dumps([profile.id, profile.version, data, getattr(profile, "overrides", None)], sort_keys=True,
                          default=str)
        key = hashlib.blake2b(blob.encode(), digest_size=16).hexdigest()
        try:
            object.__setattr__(profile, "_rhledger_cache_key", key)
        except (AttributeError, TypeError):
            pass
    ctx = json.dumps([context.rhd_negative_frequency, context.maternal_blood_volume_ml,
                      [dataclasses.astuple(p) for p in context.products], str(context.tz)], default=str)
    return key + hashlib.blake2b(ctx.encode(), digest_size=8).hexdigest()


class PlanCache:
    """Plans by pregnancy id, each with the content and planner it was made from; bounded (LRU)."""

    def __init__(self, capacity: int = 250_000):
        self.capacity = capacity
        self._items: OrderedDict[str, tuple[str, str, PlanEntry]] = OrderedDict()
        self._lock = threading.Lock()
        self.hits = self.misses = 0

    def get(self, pid: str, content: str, planner: str, now: datetime) -> Plan | None:
        with self._lock:
            hit = self._items.get(pid)
            if hit is None or hit[0] != content or hit[1] != planner or not hit[2].holds(now):
                self.misses += 1
                return None
            self._items.move_to_end(pid)
            self.hits += 1
            entry = hit[2]
        return rebased(entry, now)

    def put(self, pid: str, content: str, planner: str, entry: PlanEntry) -> None:
        with self._lock:
            self._items[pid] = (content, planner, entry)
            self._items.move_to_end(pid)
            while len(self._items) > self.capacity:
                self._items.popitem(last=False)

    def plan(self, history: tuple[dict, dict, list[dict]], *, now: datetime, profile, context) -> Plan:
        """The plan of one pregnancy at ``now``: the kept one when it still holds, else made and kept."""
        woman, pregnancy, entries = history
        content, planner = content_key(woman, pregnancy, entries), planner_key(profile, context)
        got = self.get(pregnancy["id"], content, planner, now)
        if got is not None:
            return got
        entry = plan_for_now(woman, pregnancy, entries, now=now, profile=profile, context=context)
        self.put(pregnancy["id"], content, planner, entry)
        return entry.plan if entry.plan.now == now.astimezone(timezone.utc) else rebased(entry, now)
