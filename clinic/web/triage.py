"""Today at a glance: the worklist's rows in urgency tiers, each split by kind, for a phone.

Tiers, most urgent first:

* ``now``, "Cannot wait": overdue items (the deadline has passed, the late window is open) and
  running countdowns (a hard deadline within the next 72 hours: an event's or a birth's anti-D,
  or any other window about to close);
* ``due``: the window is open and its deadline further off;
* ``soon``: opening within the worklist's next 14 days.

"Cannot wait" comes in order of the time left to act (see ``triage``); the others keep the
worklist's order.

Kinds: anti-D (the doses and FMH tests of routine prophylaxis, sensitising events and births),
typing and screens, surveillance. Only the anti-D group of "Cannot wait" is open when the page opens; every other
group is folded, with its count, one tap from its rows. Alerts are grouped the same way: the
danger ones open, the warnings folded.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime, timedelta

from clinic.care.codes import Category
from clinic.web.helpers import as_dt
from clinic.web.helpers import field_of as _get

COUNTDOWN = timedelta(hours=72)
TIERS = (
    ("now", "Cannot wait"),
    ("due", "Due"),
    ("soon", "In the next 14 days"),
)
KINDS = (
    ("anti-d", "Anti-D: doses and FMH tests"),
    ("tests", "Typing and screens"),
    ("surveillance", "Surveillance"),
)
_KIND_OF_CATEGORY = {
    Category.ROUTINE: "anti-d", Category.EVENT: "anti-d", Category.POSTPARTUM: "anti-d",
    Category.TYPING: "tests", Category.SCREEN: "tests", Category.BIRTH: "tests",
    Category.SURVEILLANCE: "surveillance",
}
OPEN_GROUPS = {("now", "anti-d")}


def countdown_running(item, now: datetime) -> bool:
    """Due, with its hard deadline still ahead and at most 72 hours away."""
    closes = as_dt(_get(item, "closes"))
    return _get(item, "state") == "due" and closes is not None and now < closes <= now + COUNTDOWN


def tier_of(item, now: datetime) -> str:
    state = _get(item, "state")
    if state == "overdue" or countdown_running(item, now):
        return "now"
    return "due" if state == "due" else "soon"


def kind_of(item) -> str:
    category = _get(item, "category")
    if category not in _KIND_OF_CATEGORY:
        raise ValueError(f"plan item category {category!r} is not one of {', '.join(_KIND_OF_CATEGORY)}")
    return _KIND_OF_CATEGORY[category]


@dataclass
class Group:
    key: str            # "<tier>-<kind>", also the element id on the page
    label: str
    rows: list
    open: bool

    @property
    def count(self) -> int:
        return len(self.rows)


@dataclass
class Tier:
    key: str
    label: str
    groups: list[Group] = field(default_factory=list)

    @property
    def count(self) -> int:
        return sum(g.count for g in self.groups)


def time_to_act(item, now: datetime) -> datetime | None:
    """The next deadline that still counts: the hard one while it is ahead, then the end of the
    late window."""
    closes = as_dt(_get(item, "closes"))
    if closes is not None and closes > now:
        return closes
    return as_dt(_get(item, "late_until")) or closes


def triage(rows: list[dict], now: datetime) -> list[Tier]:
    """The non-empty tiers, most urgent first, each with its non-empty groups in KINDS order.

    "Cannot wait" is ordered by the time still left to act, so a dose whose 72 hours run out
    tomorrow comes before one already late with a week of its late window left; the other tiers
    keep the worklist's order (``rows`` come most urgent first from ``worklist.build``)."""
    buckets: dict[tuple[str, str], list] = {}
    far = now + timedelta(days=3650)
    now_rows = sorted((r for r in rows if tier_of(r["item"], now) == "now"),
                      key=lambda r: time_to_act(r["item"], now) or far)
    for r in now_rows + [r for r in rows if tier_of(r["item"], now) != "now"]:
        buckets.setdefault((tier_of(r["item"], now), kind_of(r["item"])), []).append(r)
    out = []
    for tier, tier_label in TIERS:
        groups = [Group(f"{tier}-{kind}", label, buckets[(tier, kind)], (tier, kind) in OPEN_GROUPS)
                  for kind, label in KINDS if (tier, kind) in buckets]
        if groups:
            out.append(Tier(tier, tier_label, groups))
    return out


def alert_groups(alerts: list[dict]) -> list[Group]:
    """Danger alerts (open), then warnings (folded); empty groups left out."""
    out = []
    for sev, label, is_open in (("danger", "Danger", True), ("warning", "Warnings", False)):
        rows = [a for a in alerts if _get(a["alert"], "severity") == sev]
        if rows:
            out.append(Group(f"alerts-{sev}", label, rows, is_open))
    return out


def headline(message: str) -> str:
    """The alert's first clause ("postpartum anti-D missed"), for its one line; the full message
    is one tap away."""
    head = (message or "").split(":", 1)[0].strip()
    return head[:1].upper() + head[1:]


def short_title(title: str) -> str:
    """The item's title without its parenthesis ("Routine antenatal anti-D 1 of 1")."""
    return (title or "").split(" (", 1)[0]
