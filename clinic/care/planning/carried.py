"""What travels with the woman: a missed anti-D dose and what follows from it, and the facts an
earlier pregnancy hands on to her next one (a missed dose, an antibody found).

- ``follow_up(pl, occurred_at, what)``: what follows a missed dose, in words, from the profile's
  ``missed_dose`` section (an antibody screen later, and at her next booking);
- ``missed_doses(pl)``: this pregnancy's missed postpartum and event doses (``Plan.missed_doses``);
- ``summarise_earlier(pregnancy, entries, plan, tz)``: the pure summary of one pregnancy that a later
  pregnancy of the same woman is planned with (``plan_pregnancy(..., earlier=[...])``);
- ``earlier_alerts(pl)``: the alerts that summary raises at her next booking.
"""
from __future__ import annotations

from collections.abc import Iterable
from datetime import date, datetime, timedelta, timezone, tzinfo
from typing import Any

from clinic.care import codes
from clinic.care.codes import AlertCode, Category
from clinic.care.errors import CareInputError
from clinic.care.model import EarlierPregnancy, MissedDose, Plan
from clinic.care.planning.core import Planner, midnight
from clinic.records.choices import event_words
from clinic.records.values import parse_utc

# The items whose "missed" is a missed anti-D dose that travels with her (routine doses do not:
# the birth and the postpartum dose still follow them in the same pregnancy).
_CARRIED = (Category.POSTPARTUM, Category.EVENT)
# Origins of an anti-D finding that are not an antibody of hers (prophylaxis given).
_PASSIVE = ("passive", "probable-passive")


def _span(days: int) -> str:
    return f"about {days // 30} months" if days >= 60 and days % 30 == 0 else f"{days} days"


def screen_from(pl: Planner, occurred_at: datetime) -> date:
    """The local date from which the follow-up antibody screen after a missed dose is due."""
    days = pl.p.get("missed_dose.follow_up_screen_after_days")
    return occurred_at.astimezone(pl.tz).date() + timedelta(days=days)


def follow_up(pl: Planner, occurred_at: datetime, what: str) -> str:
    """What follows a dose missed after ``what`` ("the birth", "the antepartum haemorrhage")."""
    days = pl.p.get("missed_dose.follow_up_screen_after_days")
    return (f"she may have made anti-D: an antibody screen from {screen_from(pl, occurred_at).isoformat()} "
            f"({_span(days)} after {what}) and at the booking of her next pregnancy; tell her, and write it "
            f"on her card")


def _what(pl: Planner, category: str, related_id: str | None) -> str:
    if category == Category.POSTPARTUM:
        return "the birth"
    for e in pl.h.of("event"):
        if e["id"] == related_id:
            return f"the {event_words(e['event_kind'])}"
    return "the event"


def missed_doses(pl: Planner) -> None:
    """Each missed postpartum or event dose, with what follows (and the follow-up screen once taken)."""
    src = pl.p.section_source("missed_dose")
    for it in pl.items:
        if it.state != "missed" or it.category not in _CARRIED or not codes.gives_anti_d(it.code):
            continue
        occurred = it.due or it.opens
        missed_at = it.late_until or it.closes
        if occurred is None or missed_at is None:
            continue  # an item that was never due cannot have been missed
        what = _what(pl, it.category, it.related_id)
        start = screen_from(pl, occurred)
        after = [s for s in pl.h.of("screen") if parse_utc(s["sampled_at"]) >= midnight(start, pl.tz)]
        m = MissedDose(it.code, it.title, it.related_id, occurred, missed_at, start, follow_up(pl, occurred, what),
                       src)
        if after:
            s = after[0]
            m.screen_id = s["id"]
            m.follow_up = (f"follow-up antibody screen taken {parse_utc(s['sampled_at']).astimezone(pl.tz).date()}"
                           f": {s['result']}; she still tells the booking midwife of her next pregnancy")
        pl.missed.append(m)


# ---- earlier pregnancies ---------------------------------------------------------------

def _local_day(text: str, tz: tzinfo) -> str:
    return parse_utc(text).astimezone(tz).date().isoformat()


def summarise_earlier(pregnancy: dict, entries: Iterable[dict], plan: Plan,
                      tz: tzinfo = timezone.utc) -> EarlierPregnancy:
    """What one pregnancy hands on to the woman's next: its missed doses and the antibodies found.

    ``plan`` is that pregnancy's own plan (``plan_pregnancy``); ``entries`` its records (voided
    ones are skipped). Pure: reads nothing else."""
    if not isinstance(plan, Plan):
        raise CareInputError("earlier", "summarise_earlier needs the earlier pregnancy's Plan")
    live = [e for e in entries if isinstance(e, dict) and not e.get("voided")]
    births = sorted((e for e in live if e.get("kind") == "birth"), key=lambda b: b["born_at"])
    missed = tuple(f"{m.title[:1].lower()}{m.title[1:]} ({m.occurred_at.astimezone(tz).date().isoformat()})"
                   for m in plan.missed_doses)
    found: dict[str, str] = {}
    for f in plan.antibodies:
        origin = f.get("origin")
        name = str(f.get("antibody") or "an antibody")
        if origin in _PASSIVE or name in found:
            continue
        judged = {"immune": "immune", "undetermined": "not yet judged passive or immune"}.get(origin or "", "")
        day = _local_day(f["sampled_at"], tz) if f.get("sampled_at") else ""
        found[name] = f"{name} ({', '.join(x for x in (judged, day) if x)})" if (judged or day) else name
    for s in live:
        if s.get("kind") == "screen" and s.get("result") == "positive" and not s.get("antibodies"):
            key = f"unidentified:{s['id']}"
            found[key] = f"a positive antibody screen of {_local_day(s['sampled_at'], tz)}, antibody not identified"
    return EarlierPregnancy(str(pregnancy.get("id", "")), pregnancy.get("booked_on"),
                            _local_day(births[0]["born_at"], tz) if births else None, missed, tuple(found.values()))


def check_earlier(earlier: Any) -> tuple[EarlierPregnancy, ...]:
    """plan_pregnancy's ``earlier=``: a list of EarlierPregnancy (summarise_earlier makes them)."""
    if earlier is None:
        return ()
    if isinstance(earlier, (str, bytes, dict)) or not isinstance(earlier, Iterable):
        raise CareInputError("earlier", "must be a list of EarlierPregnancy summaries")
    out = tuple(earlier)
    for e in out:
        if not isinstance(e, EarlierPregnancy):
            raise CareInputError("earlier", f"each item must be an EarlierPregnancy (from summarise_earlier), "
                                            f"not {type(e).__name__}")
    return out


def _which(e: EarlierPregnancy) -> str:
    parts = [f"booked {e.booked_on}" if e.booked_on else "", f"birth {e.ended_on}" if e.ended_on else ""]
    inner = ", ".join(p for p in parts if p)
    return f"her earlier pregnancy{f' ({inner})' if inner else ''}"


def earlier_alerts(pl: Planner) -> None:
    """At her booking (and after): an earlier missed dose or antibody is said out loud."""
    if not pl.earlier:
        return
    src = pl.p.section_source("missed_dose")
    screens = pl.h.of("screen")
    first = screens[0] if screens else None
    seen = (f"; this pregnancy's antibody screen of {_local_day(first['sampled_at'], pl.tz)}: {first['result']}"
            if first else "")
    now_ids = [first["id"]] if first else []
    for e in pl.earlier:
        which = _which(e)
        if e.problem:
            pl.alert(AlertCode.EARLIER_PREGNANCY_UNREADABLE, "warning",
                     f"{which} could not be planned ({e.problem}): check it for a missed anti-D dose or an "
                     f"antibody found", src, [e.pregnancy_id])
        if e.missed:
            pl.alert(AlertCode.EARLIER_DOSE_MISSED, "info" if first else "warning",
                     f"{which}: anti-D missed — {'; '.join(e.missed)}. She may have made anti-D: "
                     + ("read this pregnancy's antibody screens with that in mind" + seen if first else
                        "take the booking antibody screen now and tell the clinician"),
                     src, [e.pregnancy_id, *now_ids])
        if e.antibodies:
            pl.alert(AlertCode.EARLIER_ANTIBODY, "danger",
                     f"{which}: antibody found: {'; '.join(e.antibodies)}. Take the antibody screen now, with a "
                     f"titre or quantitation, and tell the clinician: if the antibody is still there she is "
                     f"sensitised and follows the surveillance pathway" + seen,
                     pl.p.section_source("antibody"), [e.pregnancy_id, *now_ids])
