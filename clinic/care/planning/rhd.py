"""The woman's RhD status (how she is managed), the items when she is managed as RhD positive,
and the pathway the plan puts her on."""
from __future__ import annotations

from clinic.care import codes
from clinic.care.codes import AlertCode, ItemCode
from clinic.care.model import Alert
from clinic.care.planning.core import OPEN_STATES, Planner, Record, RhdStatus
from clinic.care.protocol import Profile
from clinic.records.choices import event_words


def rhd_status(typings: list[Record], profile: Profile, alerts: list[Alert]) -> RhdStatus:
    """Managed as positive / negative / retest / untyped, from the latest typing (weak D by type)."""
    src = profile.section_source("rhd")
    if not typings:
        return {"recorded": None, "managed_as": "untyped", "reason": "no RhD typing recorded yet: type at booking",
                "record_id": None}
    t = typings[-1]
    values = {x["rhd"] for x in typings}
    if len({"positive", "negative"} & values) == 2:
        alerts.append(Alert(AlertCode.TYPING_DISCORDANT, "warning",
                            "RhD typings disagree (positive and negative recorded): send a new sample; "
                            "the most recent typing is used meanwhile", src, [x["id"] for x in typings]))
    r = t["rhd"]
    out: RhdStatus = {"recorded": r, "record_id": t.get("id"), "weak_d_type": t.get("weak_d_type"),
                      "partial_d_category": t.get("partial_d_category")}
    if r == "positive":
        _manage(out, "positive", "RhD positive: no anti-D prophylaxis")
    elif r == "negative":
        _manage(out, "negative", "RhD negative: anti-D prophylaxis pathway")
    elif r == "weak-d":
        wt = (t.get("weak_d_type") or "").strip()
        major = wt.split(".")[0] if wt else ""
        if major and major in profile.get("rhd.weak_d_types_managed_positive"):
            _manage(out, "positive", f"weak D type {wt}: managed as RhD positive (no anti-D)")
        elif wt:
            listed = ", ".join(profile.get("rhd.weak_d_types_managed_positive")) or "none"
            _manage(out, "negative", f"weak D type {wt} (genotyped): managed as RhD negative, as this type "
                                     f"is not among those the profile manages as RhD positive ({listed})")
        else:
            _manage(out, "negative", "weak D, type not known: managed as RhD negative until genotyped")
            alerts.append(Alert(AlertCode.WEAK_D_GENOTYPE, "info",
                                "weak D without a type: send for RHD genotyping; managed as RhD negative meanwhile",
                                src, [t["id"]]))
    elif r == "partial-d":
        cat = t.get("partial_d_category")
        _manage(out, "negative", f"partial D{(' ' + cat) if cat else ''}: managed as RhD negative (can make anti-D)")
    else:
        _manage(out, "retest", "RhD typing inconclusive: retest on a new sample")
        alerts.append(Alert(AlertCode.TYPING_INCONCLUSIVE, "warning", "RhD typing inconclusive: take a new sample "
                            "and retest; treat as RhD negative for any sensitising event meanwhile", src, [t["id"]]))
    return out


def _manage(out: RhdStatus, managed_as: str, reason: str) -> None:
    out["managed_as"] = managed_as
    out["reason"] = reason


def not_needed_items(pl: Planner) -> None:
    """Managed as RhD positive: show the prophylaxis items as not needed, with why."""
    reason = pl.rhd["reason"]
    src = pl.p.section_source("rhd")
    for r in pl.p.routine_doses():
        pl.add(codes.routine_dose_code(r.number), f"Routine antenatal anti-D {r.number}", "not-needed", reason, src)
    for e in pl.h.of("event"):
        pl.add(codes.event_dose_code(e["id"]), f"Anti-D after {event_words(e['event_kind'])}", "not-needed", reason,
               src, related_id=e["id"])
    pl.add(ItemCode.POSTPARTUM_DOSE, "Anti-D after birth", "not-needed", reason, src,
           related_id=pl.birth["id"] if pl.birth else None)


def pathway(pl: Planner) -> str:
    status = pl.preg.get("status")
    if status in ("transferred", "lost-to-follow-up"):
        return "ended"
    managed = pl.rhd["managed_as"]
    if pl.ab.surveillance:
        path = "surveillance"
    elif managed == "positive":
        path = "not-needed"
    elif managed == "retest":
        path = "retest"
    elif managed == "untyped":
        path = "untyped"
    else:
        path = "prophylaxis"
    if status in ("delivered", "ended-early") and not any(i.state in OPEN_STATES for i in pl.items):
        return "ended"
    return path
