"""A task that only informs a later choice ends when the choice is gone.

The profile's ``[decisions]`` table says, for every plan item, which items' choice it informs
(``serves``) and whether informing it is all the item is for (``only``): the father's RhD type
only lets her decline routine antenatal anti-D; the cell-free fetal RHD test only decides
antenatal anti-D (and, for a sensitised woman, her surveillance). Once every item it serves is
given, not needed or past its window, such a task closes as not needed with the reason "no longer needed: ..."
(``codes.NO_LONGER_NEEDED``), never shown as overdue or counted as missed afterwards. This runs
last, over the items the other sections made.
"""
from __future__ import annotations

from clinic.care import codes
from clinic.care.codes import NO_LONGER_NEEDED
from clinic.care.model import PlanItem
from clinic.care.planning.core import OPEN_STATES, Planner

_CLOSABLE = OPEN_STATES + ("missed",)


def close_spent(pl: Planner) -> None:
    table = pl.p.get("decisions")
    for it in pl.items:
        entry = table.get(codes.parse_item_code(it.code)[0])
        if not entry or not entry["only"] or it.state not in _CLOSABLE:
            continue
        why = _gone(pl, entry["serves"])
        if why:
            it.state, it.timeliness = "not-needed", None
            it.reason = f"{NO_LONGER_NEEDED}: it informs {entry['decision']}, and {why}"


def _gone(pl: Planner, serves: list[str]) -> str | None:
    """Why the choice these items make is gone, or None while it is still to be made."""
    served = [i for i in pl.items if codes.parse_item_code(i.code)[0] in serves]
    if not served or any(i.state in OPEN_STATES for i in served):
        return None
    stop = pl.stop_reason()
    if stop:
        return f"that choice no longer arises ({stop})"
    return "that choice has been made or has passed: " + "; ".join(f"{_title(i)} {_closed(i)}" for i in served)


def _title(it: PlanItem) -> str:
    t = it.title.split(" (")[0]
    return t[:1].lower() + t[1:]


def _closed(it: PlanItem) -> str:
    if it.state == "done":
        return "given" if codes.gives_anti_d(it.code) else "done"
    return {"not-needed": "not needed", "missed": "past its window"}.get(it.state, it.state)
