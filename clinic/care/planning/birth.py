"""The birth: the cord blood typing, the postpartum anti-D dose and the FMH test after birth."""
from __future__ import annotations

from datetime import timedelta

from clinic.care import calc
from clinic.care.codes import AlertCode, ItemCode
from clinic.care.planning import carried
from clinic.care.planning.core import Planner, fmt, midnight, window_state
from clinic.care.planning.doses import POSTPARTUM
from clinic.care.planning.fmh import fmh_test_done
from clinic.records.values import parse_utc


def birth_items(pl: Planner) -> None:
    if not pl.birth:
        _before_birth(pl)
        return
    p, tz = pl.p, pl.tz
    pp = p.get("postpartum")
    src = p.section_source("postpartum")
    stop = pl.stop_reason()
    b = pl.birth
    born = parse_utc(b["born_at"])
    closes = born + timedelta(hours=pp["deadline_hours"])
    late = born + timedelta(days=pp["late_window_days"])
    rhds = [x.get("baby_rhd") for x in pl.births]
    ids = [x["id"] for x in pl.births]
    # cord blood typing
    cord = pl.add(ItemCode.CORD_TYPING, "Cord blood RhD typing and DAT", "due", "", src, due=born, opens=born,
                  closes=closes, late_until=None, related_id=b["id"])
    if all(r in ("positive", "negative") for r in rhds):
        cord.state, cord.done_record_id, cord.done_at, cord.timeliness = "done", b["id"], born, "on-time"
        cord.reason = "baby RhD " + ", ".join(str(r) for r in rhds) + (f"; DAT {b.get('dat')}" if b.get("dat") else "")
    else:
        cord.state = "due" if pl.now <= closes else "missed"
        which = "the cord or baby blood" if len(rhds) == 1 else "each baby not yet typed"
        cord.reason = f"{_babies(pl.births)}: type {which}; until then the mother's dose is due"
    if any(x.get("dat") == "positive" for x in pl.births):
        pl.alert(AlertCode.BABY_DAT_POSITIVE, "warning",
                 "the baby's DAT is positive: after antenatal anti-D this may be passive antibody; it does not by "
                 "itself cancel the mother's postpartum dose — a clinician decides; check the baby for "
                 "jaundice and anaemia", src, ids)
    # the mother's dose
    it = pl.add(ItemCode.POSTPARTUM_DOSE, "Anti-D after birth", "due", "", src, due=born, opens=born, closes=closes,
                late_until=late, dose_iu=pp["dose_iu"], related_id=b["id"])
    given = pl.assigned.get(POSTPARTUM, [])
    baby_neg = all(r == "negative" for r in rhds)
    if given:
        pl.mark_done(it, given[0], closes)
        it.reason = f"given {fmt(given[0].at, tz)} ({given[0].iu} IU)" + (
            "" if it.timeliness == "on-time" else f", after {pp['deadline_hours']:g} hours")
        if baby_neg:
            pl.alert(AlertCode.POSTPARTUM_DOSE_BABY_NEGATIVE, "info",
                     "a postpartum dose was recorded although the baby is RhD negative", src, [given[0].id])
        total = sum(d.iu for d in given)
        if total < pp["dose_iu"]:
            pl.alert(AlertCode.DOSE_BELOW_REQUIRED, "warning",
                     f"{total} IU given after birth; the profile asks for at least {pp['dose_iu']} IU", src,
                     [d.id for d in given])
    elif stop:
        it.state, it.reason, it.dose_iu = "not-needed", stop, None
    elif baby_neg:
        it.state, it.dose_iu = "not-needed", None
        it.reason = ("the baby is RhD negative" if len(rhds) == 1 else f"all {len(rhds)} babies are RhD negative") \
            + ": no anti-D needed"
    else:
        why = _babies(pl.births)
        it.state = window_state(pl.now, born, closes, late)
        it.reason = {
            "due": f"{why}: give {pp['dose_iu']} IU ({calc.iu_to_ug(pp['dose_iu']):g} µg) by {fmt(closes, tz)}",
            "overdue": f"{why}: the {pp['deadline_hours']:g}-hour deadline passed at {fmt(closes, tz)}; give it "
                       f"now — a late dose may still protect (until {fmt(late, tz)})",
            "missed": f"{why}: no dose within {pp['deadline_hours']:g} hours or the late window "
                      f"(closed {fmt(late, tz)})",
            "not-yet-due": why}[it.state]
        if it.state == "overdue":
            pl.alert(AlertCode.POSTPARTUM_DOSE_OVERDUE, "danger", "postpartum anti-D not given: " + it.reason, src,
                     [b["id"]])
        elif it.state == "missed":
            pl.alert(AlertCode.POSTPARTUM_DOSE_MISSED, "danger", "postpartum anti-D missed: " + it.reason
                     + "; tell the clinician: " + carried.follow_up(pl, born, "the birth"), src, [b["id"]])
    # the FMH test after birth
    if pp["fmh_test_required"] and it.state != "not-needed" and not stop:
        fit = pl.add(ItemCode.POSTPARTUM_FMH, "FMH test after birth", "due",
                     "take the mother's sample for an FMH test after birth (before the anti-D where "
                     "possible) to see whether more anti-D is needed", p.section_source("fmh"),
                     due=born, opens=born, closes=closes, late_until=late, related_id=b["id"])
        fmhs = pl.h.of("fmh")
        tests = [f for f in fmhs if f.get("covers_id") in ids] or \
                [f for f in fmhs if not f.get("covers_id") and parse_utc(f["sampled_at"]) >= born]
        fmh_test_done(pl, fit, tests, closes, late, born)


def _babies(births: list) -> str:
    """The babies' RhD as recorded, in words that say what is known (twins may differ)."""
    rhds = [x.get("baby_rhd") for x in births]
    still = ", stillbirth" if any(x.get("outcome") == "stillbirth" for x in births) else ""
    if len(rhds) == 1:
        return ("the baby is RhD positive" if rhds[0] == "positive" else
                f"the baby's RhD group is not known (not tested{still})")
    pos, neg = rhds.count("positive"), rhds.count("negative")
    untyped = len(rhds) - pos - neg
    n = len(rhds)
    if pos == n:
        return f"all {n} babies are RhD positive"
    parts = [f"{pos} of the {n} babies is RhD positive" if pos == 1 else f"{pos} of the {n} babies are RhD positive"
             if pos else "",
             f"{neg} RhD negative" if neg else "",
             f"{untyped} not tested{still}" if untyped else ""]
    text = ", ".join(p for p in parts if p)
    if pos:
        return text
    return f"no baby is known to be RhD positive ({text}): the RhD group of {untyped} of the {n} is not known"


def _before_birth(pl: Planner) -> None:
    """No birth yet: the birth items are shown as coming at the EDD."""
    pp = pl.p.get("postpartum")
    src = pl.p.section_source("postpartum")
    edd_at = midnight(pl.dating.edd, pl.tz)
    stop = pl.stop_reason()
    status = pl.preg.get("status")
    for code, title in ((ItemCode.CORD_TYPING, "Cord blood RhD typing and DAT at birth"),
                        (ItemCode.POSTPARTUM_DOSE, "Anti-D after birth")):
        it = pl.add(code, title, "not-yet-due", "", src, due=edd_at,
                    dose_iu=pp["dose_iu"] if code == ItemCode.POSTPARTUM_DOSE else None)
        if status == "ended-early":
            it.state, it.reason, it.dose_iu = "not-needed", "the pregnancy ended early", None
        elif code == ItemCode.POSTPARTUM_DOSE and stop:
            it.state, it.reason, it.dose_iu = "not-needed", stop, None
        else:
            it.reason = ("at birth: cord blood for the baby's RhD group and DAT" if code == ItemCode.CORD_TYPING else
                         f"if the baby is RhD positive or not known: {pp['dose_iu']} IU "
                         f"({calc.iu_to_ug(pp['dose_iu']):g} µg) within {pp['deadline_hours']:g} hours of birth")
