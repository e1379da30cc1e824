"""The planning core: the history read once, the facts drawn from it, and the planner state.

``History`` reads stored record dicts (schema.py), skips voided ones and sorts the rest by
(time, id), so the order given never matters. An entry dated after ``now`` is kept and counted
(a dose recorded is a dose given, whatever this computer's clock says) and named in a clock
warning (``History.clock_alerts``). ``Planner`` holds what every rule section reads (dating, RhD status, doses,
antibodies, fetal RhD, births) and what they write (items and alerts, in order). The rule
sections are the other modules of this package; each is a function of a ``Planner``.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date, datetime, time, timedelta, timezone, tzinfo
from typing import Any, Iterable, TypedDict

from clinic.care import codes
from clinic.care.dating import Dating
from clinic.care.errors import CareInputError
from clinic.care.model import Alert, CareContext, EarlierPregnancy, MissedDose, PlanItem
from clinic.care.protocol import Profile
from clinic.records.schema import KINDS
from clinic.records.values import parse_utc

Record = dict[str, Any]

# A record dated a little after ``now`` is no sign of a wrong clock (clocks of phones and
# laptops differ by minutes).
SKEW = timedelta(minutes=10)
OPEN_STATES = codes.OPEN_STATES
# The upper GA the event rules are defined for (profile events.bands cover 0+0 to 44+0).
GA_RULES_MAX_DAYS = 44 * 7

_WHEN_FIELD = {"typing": "tested_on", "partner_typing": "tested_on", "fetal_rhd": "sampled_on",
               "screen": "sampled_at", "event": "occurred_at", "fmh": "sampled_at", "dose": "given_at",
               "doppler": "measured_at", "fbs": "sampled_at", "iut": "given_at", "birth": "born_at",
               "referral": "referred_on"}


# ---- time helpers ------------------------------------------------------------------------

def midnight(d: date, tz: tzinfo) -> datetime:
    return datetime.combine(d, time(0), tzinfo=tz).astimezone(timezone.utc)


def end_of_ga_day(dating: Dating, ga_days: int, tz: tzinfo) -> datetime:
    """The hard deadline of a GA window that closes on ``ga_days``: the next local midnight."""
    return midnight(dating.date_at(ga_days + 1), tz)


def window_state(now: datetime, opens: datetime | None, closes: datetime | None,
                 late_until: datetime | None) -> str:
    """not-yet-due before ``opens``, due until ``closes``, overdue until ``late_until``, then missed."""
    if opens is not None and now < opens:
        return "not-yet-due"
    if closes is None or now <= closes:
        return "due"
    if late_until is None or now <= late_until:
        return "overdue"
    return "missed"


def fmt(dt: datetime, tz: tzinfo) -> str:
    return dt.astimezone(tz).strftime("%Y-%m-%d %H:%M")


def new_alert(code: str, severity: str, message: str, source: str, ids: Iterable[str | None] = ()) -> Alert:
    """An alert naming the records it is about (ids that are None or empty are left out)."""
    return Alert(code, severity, message, source, [i for i in ids if i])


# ---- reading records -----------------------------------------------------------------------

def _check_required(e: Record) -> None:
    """A stored entry missing a required field cannot be planned: say which one."""
    spec = KINDS.get(e.get("kind", ""))
    if spec is None:
        raise CareInputError("kind", f"entry {e.get('id')!r} has kind {e.get('kind')!r}; allowed: "
                                     f"{', '.join(k for k, v in KINDS.items() if v.parent == 'pregnancy')}")
    if "id" not in e:
        raise CareInputError("id", f"a {e['kind']} entry has no id")
    for f in spec.fields:
        if f.required and e.get(f.name) in (None, ""):
            raise CareInputError(f"{e['kind']}.{f.name}", f"is required (entry {e['id']})")


def _created(e: Record) -> datetime:
    v = e.get("created_at")
    return parse_utc(v) if v else datetime(1900, 1, 1, tzinfo=timezone.utc)


class History:
    """The entries of one pregnancy, read once: parsed times, grouped by kind, in a fixed order."""

    def __init__(self, entries: Iterable[Any], now: datetime, tz: tzinfo):
        self.tz = tz
        self.now = now
        rows: list[tuple[datetime, str, Record]] = []
        # Entries dated after now: kept and counted, never skipped. Skipping them when this
        # computer's clock runs behind would show a dose already given as still to give.
        self.ahead: list[Record] = []
        for e in entries:
            if not isinstance(e, dict):
                raise CareInputError("entries", f"each entry must be a stored record (a dict), not {type(e).__name__}")
            if e.get("voided"):
                continue
            _check_required(e)
            t = self.when(e)
            if t is not None and t > now + SKEW:
                self.ahead.append(e)
            rows.append((t or _created(e), str(e.get("id", "")), e))
        rows.sort(key=lambda r: (r[0], r[1]))
        self.by_kind: dict[str, list[Record]] = {}
        self.time: dict[str, datetime] = {}
        for t, rid, e in rows:
            self.by_kind.setdefault(e.get("kind", ""), []).append(e)
            self.time[rid] = t

    def when(self, e: Record) -> datetime | None:
        f = _WHEN_FIELD.get(e.get("kind", ""))
        v = e.get(f) if f else None
        if f is None or v is None:
            return None
        if f.endswith("_on"):
            return midnight(date.fromisoformat(v), self.tz)
        return parse_utc(v)

    def of(self, kind: str) -> list[Record]:
        return self.by_kind.get(kind, [])

    def clock_alerts(self) -> list[Alert]:
        """A warning naming the entries dated after now (they are counted all the same)."""
        if not self.ahead:
            return []
        ahead = sorted(self.ahead, key=lambda e: (self.time[str(e.get("id", ""))], str(e.get("id", ""))))
        latest = self.time[str(ahead[-1].get("id", ""))]
        return [new_alert(
            codes.AlertCode.CLOCK_BEHIND, "warning",
            f"{len(self.ahead)} entr{'y is' if len(self.ahead) == 1 else 'ies are'} dated after now (the latest "
            f"{fmt(latest, self.tz)}, this computer's clock says {fmt(self.now, self.tz)}): this computer's clock "
            f"may be behind, or the time was entered wrongly. They are counted as recorded; check the clock "
            f"and the entries before giving anything they cover.",
            "rhledger: a recorded entry counts whatever the clock says",
            [str(e.get("id")) for e in ahead])]


# ---- facts drawn from the history ------------------------------------------------------------

class RhdStatus(TypedDict, total=False):
    """Plan.rhd: the woman's RhD as recorded and as managed (positive / negative / retest / untyped)."""

    recorded: str | None
    managed_as: str
    reason: str
    record_id: str | None
    weak_d_type: str | None
    partial_d_category: str | None


@dataclass(eq=False)
class Dose:
    """An anti-D administration as counted: the record, when it was given, and its IU."""

    record: Record
    at: datetime
    iu: int

    @property
    def id(self) -> str:
        return str(self.record["id"])

    @property
    def indication(self) -> str:
        return str(self.record["indication"])

    def get(self, name: str) -> Any:
        return self.record.get(name)


@dataclass
class Antibodies:
    """What the antibody screens show: the first immune anti-D, and whether surveillance is needed."""

    immune_at: datetime | None = None       # first immune anti-D sample
    immune_id: str | None = None
    surveillance: bool = False
    findings: list[dict[str, Any]] = field(default_factory=list)
    # Positive screen id -> what it leaves unidentified (no antibody named, or one of unknown
    # significance), in words; and the screens whose anti-D is neither passive nor immune yet.
    unidentified: dict[str, str] = field(default_factory=dict)
    undetermined: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class FetalFacts:
    """The baby's chance of being RhD positive (Plan.fetal_rhd) and what the father's typing allows."""

    summary: dict[str, Any]
    partner_negative: bool      # RhD negative, paternity certain, and the profile lets her decline
    partner_id: str | None


# ---- the planner state ---------------------------------------------------------------------

@dataclass(eq=False)
class Planner:
    """One plan being worked out. The rule sections read its facts and add items and alerts."""

    woman: Record
    preg: Record
    now: datetime
    p: Profile
    ctx: CareContext
    h: History
    dating: Dating
    rhd: RhdStatus
    doses: list[Dose]
    ab: Antibodies
    fetal: dict[str, Any]
    partner_negative: bool
    partner_id: str | None
    alerts: list[Alert]
    items: list[PlanItem] = field(default_factory=list)
    # Dose assignment key (doses.py) -> the doses counted for it, in time order.
    assigned: dict[str, list[Dose]] = field(default_factory=dict)
    unassigned: list[Dose] = field(default_factory=list)
    # Assignment key -> the IU an FMH result asks for in all (more than the standard dose).
    fmh_need: dict[str, int] = field(default_factory=dict)
    # The woman's earlier pregnancies (plan_pregnancy's ``earlier=``) and this one's missed doses.
    earlier: tuple[EarlierPregnancy, ...] = ()
    missed: list[MissedDose] = field(default_factory=list)
    births: list[Record] = field(init=False)
    birth: Record | None = field(init=False)
    born_at: datetime | None = field(init=False)

    def __post_init__(self) -> None:
        self.births = self.h.of("birth")
        self.birth = self.births[0] if self.births else None
        self.born_at = parse_utc(self.birth["born_at"]) if self.birth else None

    @property
    def tz(self) -> tzinfo:
        return self.ctx.tz

    @property
    def prophylaxis(self) -> bool:
        """Is she on the anti-D pathway (RhD negative, or not yet known to be positive)?"""
        return self.rhd["managed_as"] in ("negative", "retest", "untyped")

    # -- reading
    def ga_of(self, e: Record, t: datetime) -> int:
        """The GA recorded on the entry, else the GA of its local day by the dating."""
        g = e.get("ga_days")
        return int(g) if g is not None else self.dating.ga_days(t, self.tz)

    def at_ga(self, ga_days: int) -> datetime:
        return midnight(self.dating.date_at(ga_days), self.tz)

    def item(self, code: str) -> PlanItem | None:
        for i in self.items:
            if i.code == code:
                return i
        return None

    def stop_reason(self) -> str | None:
        """Why prophylaxis items that are not done are not needed, or None."""
        if self.ab.immune_at is not None and self.ab.immune_at <= self.now:
            return (f"immune anti-D found on {fmt(self.ab.immune_at, self.tz)[:10]}: the woman is sensitised, "
                    f"prophylaxis no longer helps; surveillance pathway")
        if self.rhd["managed_as"] == "positive":
            return self.rhd["reason"]
        return None

    def window_until_birth(self, closes: datetime) -> datetime:
        """The late end of a pregnancy-long item: the day after the EDD, or the birth if earlier
        (never before ``closes``)."""
        late = midnight(self.dating.edd + timedelta(days=1), self.tz)
        if self.born_at:
            late = min(late, self.born_at)
        return max(late, closes)

    # -- writing
    def add(self, code: str, title: str, state: str, reason: str, source: str, **more: Any) -> PlanItem:
        """A new item (``more``: due, opens, closes, late_until, dose_iu, related_id); its category
        comes from the vocabulary (codes.ITEMS)."""
        it = PlanItem(code=code, category=codes.category_of(code), title=title, state=state, reason=reason,
                      source=source, **more)
        self.items.append(it)
        return it

    def alert(self, code: str, severity: str, message: str, source: str, ids: Iterable[str | None] = ()) -> None:
        self.alerts.append(new_alert(code, severity, message, source, ids))

    def mark_done(self, it: PlanItem, dose: Dose, closes: datetime | None) -> None:
        """The item is done by this dose: on time when given by ``closes``."""
        it.state = "done"
        it.done_record_id = dose.id
        it.done_at = dose.at
        it.timeliness = "on-time" if closes is None or dose.at <= closes else "late"
