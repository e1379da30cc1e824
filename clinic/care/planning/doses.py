"""Anti-D doses: reading them (duplicates, expired lots), which item each one covers, and the
checks over all of them (too much, too little, given when it cannot help).

Each counted dose is assigned to one key: ``routine:<n>`` (routine dose n, or ``routine:extra``),
``event:<event id>`` or ``postpartum``. A dose names what it covers (``covers_id``); one that
does not goes to the routine dose by its indication, to the birth when given after it, else to
the latest event before it that is still inside its late window.
"""
from __future__ import annotations

from datetime import date, datetime, timedelta, tzinfo

from clinic.care import calc, codes
from clinic.care.codes import AlertCode
from clinic.care.model import Alert
from clinic.care.planning.core import GA_RULES_MAX_DAYS, Dose, History, Planner, fmt
from clinic.care.protocol import Profile
from clinic.records.values import parse_utc

# Two administrations of the same IU and lot this close together are one, recorded twice.
DUPLICATE_WITHIN = timedelta(minutes=30)

POSTPARTUM = "postpartum"
ROUTINE_EXTRA = "routine:extra"
_ROUTINE, _EVENT = "routine:", "event:"


def routine_key(number: int) -> str:
    return f"{_ROUTINE}{number}"


def event_key(event_id: str) -> str:
    return f"{_EVENT}{event_id}"


def read_doses(h: History, tz: tzinfo, alerts: list[Alert], profile: Profile) -> list[Dose]:
    counted: list[Dose] = []
    src = profile.section_source("routine")
    for d in h.of("dose"):
        row = Dose(dict(d), parse_utc(d["given_at"]),
                   int(d.get("dose_iu") or round(calc.ug_to_iu(d["amount"]) if d.get("unit") == "ug" else d["amount"])))
        dup = next((c for c in counted if abs(c.at - row.at) <= DUPLICATE_WITHIN and c.iu == row.iu
                    and (c.get("lot") or "") == (row.get("lot") or "")), None)
        if dup is not None:
            alerts.append(Alert(AlertCode.DUPLICATE_DOSE, "warning",
                                f"the same administration seems recorded twice ({row.iu} IU, lot {row.get('lot')}, "
                                f"{fmt(row.at, tz)}): counted once; void the duplicate", src, [dup.id, d["id"]]))
            continue
        exp = d.get("lot_expiry")
        if exp and date.fromisoformat(exp) < row.at.astimezone(tz).date():
            alerts.append(Alert(AlertCode.LOT_EXPIRED, "danger",
                                f"lot {d.get('lot')} expired on {exp}, before it was given on "
                                f"{row.at.astimezone(tz).date().isoformat()}: tell the clinician and the blood bank; "
                                f"the dose may need repeating", src, [d["id"]]))
        counted.append(row)
    return counted


def assign_doses(pl: Planner) -> None:
    """Which item each dose covers (``pl.assigned``); doses that match nothing are flagged."""
    events = {e["id"]: e for e in pl.h.of("event")}
    birth_ids = {b["id"] for b in pl.births}
    routine_n = len(pl.p.routine_doses())
    routine_seen = 0
    for d in pl.doses:
        cov = d.get("covers_id")
        key = None
        if cov and cov in events:
            key = event_key(cov)
        elif cov and cov in birth_ids:
            key = POSTPARTUM
        elif d.indication == "routine-antenatal":
            routine_seen += 1
            if routine_seen <= routine_n:
                key = routine_key(routine_seen)
            else:
                pl.alert(AlertCode.ROUTINE_EXTRA, "warning",
                         f"more routine antenatal doses recorded than the {routine_n} of this regimen",
                         pl.p.section_source("routine"), [d.id])
                key = ROUTINE_EXTRA
        elif d.indication in ("postpartum",) or (pl.born_at and d.at >= pl.born_at):
            key = POSTPARTUM if pl.born_at else None
            if not pl.born_at:
                pl.alert(AlertCode.POSTPARTUM_DOSE_WITHOUT_BIRTH, "warning",
                         "a postpartum dose is recorded but no birth: record the birth",
                         pl.p.section_source("postpartum"), [d.id])
        else:  # sensitising-event or large-fmh without a link: the latest event before it
            late = timedelta(days=pl.p.get("events.late_window_days"))
            cands = [e for e in events.values() if pl.h.time[e["id"]] <= d.at <= pl.h.time[e["id"]] + late]
            cands.sort(key=lambda e: (pl.h.time[e["id"]], e["id"]))
            undosed = [e for e in cands if event_key(e["id"]) not in pl.assigned]
            pick = (undosed or cands)[-1] if cands else None
            key = event_key(pick["id"]) if pick else None
        if key is None and d.indication == "postpartum":
            pl.unassigned.append(d)   # already flagged: postpartum dose without a birth
        elif key is None:
            pl.unassigned.append(d)
            pl.alert(AlertCode.DOSE_UNMATCHED, "info",
                     f"{d.iu} IU given {fmt(d.at, pl.tz)} ({d.indication}) matches no event, birth "
                     f"or routine dose: link it with 'covers'", pl.p.section_source("events"), [d.id])
        else:
            pl.assigned.setdefault(key, []).append(d)


def routine_given_by(pl: Planner, t: datetime) -> list[Dose]:
    """Routine doses (of any number) given at or before ``t``."""
    return [d for k, v in pl.assigned.items() if k.startswith(_ROUTINE) for d in v if d.at <= t]


def dose_alerts(pl: Planner) -> None:
    """Checks over every counted dose, once the items are known."""
    p, tz = pl.p, pl.tz
    src = p.section_source("routine")
    fm = p.get("fmh")
    sizes = [x.vial_iu for x in pl.ctx.products] or [fm["default_vial_iu"]]
    for d in pl.doses:
        if pl.rhd["managed_as"] == "positive":
            pl.alert(AlertCode.DOSE_RHD_POSITIVE, "danger",
                     f"anti-D recorded ({d.iu} IU, {fmt(d.at, tz)}) for a woman managed as RhD positive "
                     f"({pl.rhd['reason']}): check the typing and the record", p.section_source("rhd"),
                     [d.id, pl.rhd.get("record_id")])
        if pl.ab.immune_at is not None and d.at > pl.ab.immune_at:
            pl.alert(AlertCode.DOSE_AFTER_SENSITISATION, "warning",
                     f"anti-D given {fmt(d.at, tz)} after immune anti-D was found "
                     f"({fmt(pl.ab.immune_at, tz)}): prophylaxis no longer helps; check with the clinician",
                     p.section_source("antibody"), [d.id, pl.ab.immune_id])
        allowed = _allowed_iu(pl, d, sizes)
        if allowed is not None and d.iu > allowed:
            pl.alert(AlertCode.DOSE_ABOVE_ALLOWED, "warning",
                     f"{d.iu} IU given {fmt(d.at, tz)} is more than the {allowed} IU this profile allows "
                     f"for {d.indication} (without an FMH result asking for more): check the record",
                     src, [d.id])
        if d.get("route") == "IM" and d.iu > fm["max_im_iu_at_once"]:
            pl.alert(AlertCode.DOSE_LARGE_IM, "warning",
                     f"{d.iu} IU IM at once is more than {fm['max_im_iu_at_once']} IU: an IV product should "
                     f"be considered for large doses", p.section_source("fmh"), [d.id])


def _allowed_iu(pl: Planner, d: Dose, sizes: list[int]) -> int | None:
    """The most this profile gives for the item the dose covers, rounded up to whole vials."""
    key = next((k for k, v in pl.assigned.items() if d in v), None)
    if key is None:
        return None
    std = 0
    if key.startswith(_ROUTINE):
        std = max(r.dose_iu for r in pl.p.routine_doses())
    elif key == POSTPARTUM:
        std = pl.p.get("postpartum.dose_iu")
    elif key.startswith(_EVENT):
        eid = key[len(_EVENT):]
        it = pl.item(codes.event_dose_code(eid))
        band = pl.p.band_for(pl.dating.ga_days(d.at, pl.tz) if it is None else
                             max(0, min(GA_RULES_MAX_DAYS, _event_ga(pl, eid))))
        std = max(band.dose_iu, pl.p.get("events.repeat_dose_iu"))
    std = max(std, pl.fmh_need.get(key, 0))
    whole = min(calc.vials_for(std, v) * v for v in sizes)
    return max(std, whole)


def _event_ga(pl: Planner, event_id: str) -> int:
    for e in pl.h.of("event"):
        if e["id"] == event_id:
            return pl.ga_of(e, pl.h.time[event_id])
    return 0
