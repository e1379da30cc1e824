"""Antenatal items: booking typing and screen, the father's typing, the cell-free fetal RHD
test, the routine antenatal doses and the antibody screen before the first of them."""
from __future__ import annotations

from datetime import date, datetime, timedelta

from clinic.care import calc, codes
from clinic.care.codes import NO_LONGER_NEEDED, AlertCode, ItemCode
from clinic.care.model import Alert, CareContext, PlanItem
from clinic.care.planning.core import (
    OPEN_STATES,
    FetalFacts,
    History,
    Planner,
    Record,
    end_of_ga_day,
    fmt,
    midnight,
    new_alert,
    window_state,
)
from clinic.care.planning.doses import routine_key
from clinic.care.protocol import Profile
from clinic.records.values import format_ga, parse_utc

_ONLY_IF_NEGATIVE = "; only if she is RhD negative (her typing is not yet known)"


def fetal_facts(h: History, profile: Profile, ctx: CareContext, alerts: list[Alert]) -> FetalFacts:
    """The baby's chance of being RhD positive, from the father's typing and any cell-free fetal
    RHD result; whether the profile then leaves out anti-D (targeted prophylaxis) or lets her
    decline it (RhD-negative father, paternity certain)."""
    partners = h.of("partner_typing")
    fr = h.of("fetal_rhd")
    pt: Record = partners[-1] if partners else {}
    result = fr[-1]["result"] if fr else None
    res = calc.fetal_rhd_probability(
        rhd_negative_frequency=ctx.rhd_negative_frequency, partner_rhd=pt.get("rhd", "unknown"),
        partner_zygosity=pt.get("rhd_zygosity") or "unknown",
        paternity_certain=pt.get("paternity_certain", True) is not False, fetal_rhd=result)
    res["cffdna_result"] = result
    res["cffdna_id"] = fr[-1]["id"] if fr else None
    targeted = profile.get("routine.targeted_prophylaxis")
    res["targeted_not_needed"] = bool(result == "negative" and targeted)
    src = profile.section_source("routine")
    if result == "negative" and not targeted:
        alerts.append(new_alert(AlertCode.FETAL_RHD_NEGATIVE_NOT_USED, "info",
                                "cell-free fetal RHD negative, but this profile does not use targeted prophylaxis: "
                                "anti-D is still offered", src, [res["cffdna_id"]]))
    partner_negative = bool(pt.get("rhd") == "negative" and pt.get("paternity_certain")
                            and profile.get("routine.partner_negative_may_decline"))
    if partner_negative:
        if profile.get("routine.partner_negative_skips_routine"):
            msg = ("the baby's father is RhD negative and paternity is certain: this profile marks routine "
                   "antenatal anti-D not needed; she may still choose to have it")
        else:
            msg = ("the baby's father is RhD negative and paternity is certain: the woman may choose to decline "
                   "routine antenatal anti-D (her informed choice, recorded by the midwife)")
        alerts.append(new_alert(AlertCode.PARTNER_RHD_NEGATIVE, "info", msg, src, [pt.get("id")]))
    return FetalFacts(res, partner_negative, pt.get("id"))


def _booked_at(pl: Planner) -> datetime | None:
    booked = date.fromisoformat(pl.preg["booked_on"]) if pl.preg.get("booked_on") else None
    return midnight(booked, pl.tz) if booked else None


# ---- booking typing and screen --------------------------------------------------------------

def booking(pl: Planner) -> None:
    p = pl.p
    opens = _booked_at(pl)
    late = midnight(pl.dating.edd + timedelta(days=1), pl.tz)
    if pl.born_at:
        late = min(late, pl.born_at)
    for code, kind, days_key, title in (
            (ItemCode.BOOKING_TYPING, "typing", "booking.typing_within_days", "Blood group and RhD at booking"),
            (ItemCode.BOOKING_SCREEN, "screen", "booking.screen_within_days", "Antibody screen at booking")):
        closes = opens + timedelta(days=p.get(days_key) + 1) if opens else None
        recs = pl.h.of(kind)
        it = pl.add(code, title, "due", "", p.section_source("booking"), due=opens, opens=opens, closes=closes,
                    late_until=late)
        if recs:
            r = recs[0]
            t = pl.h.time[r["id"]]
            it.state, it.done_record_id, it.done_at = "done", r["id"], t
            it.timeliness = "on-time" if closes is None or t < closes else "late"
            it.reason = "recorded"
        else:
            it.state = window_state(pl.now, opens, closes, late)
            if it.state == "missed":
                it.reason = "not done before the birth"
            else:
                it.reason = (f"take the sample{' now' if it.state != 'not-yet-due' else ''}: within "
                             f"{p.get(days_key)} days of booking")


def _typing_item_state(pl: Planner, it: PlanItem, records: list[Record], what: str) -> bool:
    """Shared states of partner-typing and fetal-rhd-test. True when the item is decided."""
    if pl.rhd["managed_as"] == "positive":
        it.state, it.reason = "not-needed", pl.rhd["reason"]
        return True
    if records:
        r = records[0]
        t = pl.h.time[r["id"]]
        it.state, it.done_record_id, it.done_at = "done", r["id"], t
        it.timeliness = "on-time" if it.closes is None or t <= it.closes else "late"
        return True
    if pl.born_at:
        # Only the choices before the birth needed it; now the baby's own typing answers them.
        it.state = "not-needed"
        it.reason = f"{NO_LONGER_NEEDED}: no {what} before the birth, and the cord blood typing now decides"
        return True
    if pl.preg.get("status") == "ended-early":
        it.state, it.reason = "not-needed", "the pregnancy ended early"
        return True
    return False


# ---- the father's RhD type ------------------------------------------------------------------

def partner_typing(pl: Planner) -> None:
    p = pl.p
    opens = _booked_at(pl)
    closes = end_of_ga_day(pl.dating, p.ga("partner_typing.closes_ga"), pl.tz)
    it = pl.add(ItemCode.PARTNER_TYPING, "RhD type of the baby's father", "due", "",
                p.section_source("partner_typing"), due=opens, opens=opens, closes=closes,
                late_until=pl.window_until_birth(closes))
    if pl.rhd["managed_as"] != "positive" and not p.get("partner_typing.offered"):
        it.state, it.reason = "not-needed", "this profile does not offer partner typing (partner_typing.offered)"
        return
    known = [x for x in pl.h.of("partner_typing") if x.get("rhd") in ("positive", "negative")]
    if _typing_item_state(pl, it, known, "partner typing"):
        if it.state == "done":
            last = known[-1]
            certain = {True: ", paternity certain", False: ", paternity not certain", None: ""}.get(
                last.get("paternity_certain"), "")
            it.reason = f"the baby's father is RhD {last['rhd']}{certain}"
        return
    it.state = window_state(pl.now, opens, closes, it.late_until)
    window = f"by {format_ga(p.ga('partner_typing.closes_ga'))}"
    unknown = pl.h.of("partner_typing")
    it.reason = ("the father's RhD type is recorded as not known: type him if he is available" if unknown else
                 "offer to type the baby's father (if he is known and willing)") + f", {window}; if he is RhD " \
        "negative and paternity is certain she may choose to decline routine antenatal anti-D"
    if pl.rhd["managed_as"] in ("untyped", "retest"):
        it.reason += _ONLY_IF_NEGATIVE


# ---- cell-free fetal RHD test (targeted prophylaxis) ------------------------------------------

def fetal_rhd_test(pl: Planner) -> None:
    p, tz = pl.p, pl.tz
    o, c, l_ = (p.ga(f"fetal_rhd.{k}") for k in ("opens_ga", "closes_ga", "late_until_ga"))
    opens = pl.at_ga(o)
    closes = end_of_ga_day(pl.dating, c, tz)
    late = end_of_ga_day(pl.dating, l_, tz)
    it = pl.add(ItemCode.FETAL_RHD_TEST, "Cell-free fetal RHD test", "due", "", p.section_source("fetal_rhd"),
                due=opens, opens=opens, closes=closes, late_until=late)
    if not p.get("routine.targeted_prophylaxis"):
        it.state = "not-needed"
        it.reason = ("this profile does not use targeted prophylaxis (routine.targeted_prophylaxis is false): "
                     "anti-D is offered without a fetal RHD test")
        return
    tests = pl.h.of("fetal_rhd")
    if _typing_item_state(pl, it, tests, "fetal RHD test"):
        if it.state == "done":
            r = tests[-1]["result"]
            it.reason = {"negative": "fetal RHD negative: routine antenatal and event anti-D not needed",
                         "positive": "fetal RHD positive: anti-D prophylaxis as planned",
                         "inconclusive": "fetal RHD inconclusive: managed as RhD positive, anti-D as planned"}[r]
        return
    it.state = window_state(pl.now, opens, closes, late)
    it.reason = {"not-yet-due": f"a maternal blood sample for the fetal RHD test from {format_ga(o)}",
                 "due": f"take the sample for the fetal RHD test now (from {format_ga(o)}, by {format_ga(c)})",
                 "overdue": f"not sampled by {format_ga(c)}: take it now, the result still guides later anti-D "
                            f"(until {format_ga(l_)})",
                 "missed": f"no fetal RHD test by {format_ga(l_)}: anti-D is given as for an RhD-positive baby"
                 }[it.state]
    if pl.rhd["managed_as"] in ("untyped", "retest"):
        it.reason += _ONLY_IF_NEGATIVE


# ---- routine antenatal prophylaxis ----------------------------------------------------------

def routine_doses(pl: Planner) -> None:
    """The routine doses of the profile's regimen, then the screen sample before the first."""
    p, tz = pl.p, pl.tz
    src = p.section_source("routine")
    stop = pl.stop_reason()
    fetal_neg = pl.fetal["targeted_not_needed"]
    regimen = p.get(f"routine.regimens.{p.regimen}")
    status = pl.preg.get("status")
    first: tuple[datetime, datetime, datetime] | None = None   # opens, closes, late of dose 1
    for r in p.routine_doses():
        opens = pl.at_ga(r.opens_ga_days)
        closes = end_of_ga_day(pl.dating, r.closes_ga_days, tz)
        late = end_of_ga_day(pl.dating, r.late_until_ga_days, tz)
        if r.number == 1:
            first = (opens, closes, late)
        it = pl.add(codes.routine_dose_code(r.number),
                    f"Routine antenatal anti-D {r.number} of {len(p.routine_doses())} ({regimen['title']})",
                    "due", "", src, due=opens, opens=opens, closes=closes, late_until=late, dose_iu=r.dose_iu)
        given = pl.assigned.get(routine_key(r.number))
        window = (f"{r.dose_iu} IU ({calc.iu_to_ug(r.dose_iu):g} µg) from {format_ga(r.opens_ga_days)}, on time "
                  f"until {format_ga(r.closes_ga_days)}, late dose still worth giving until "
                  f"{format_ga(r.late_until_ga_days)}")
        if given:
            pl.mark_done(it, given[0], closes)
            it.reason = (f"given {fmt(given[0].at, tz)} ({given[0].iu} IU)"
                         + ("" if it.timeliness == "on-time" else ", after the window closed"))
            if given[0].at < opens:
                it.reason += f", before {format_ga(r.opens_ga_days)}"
            continue
        if stop:
            it.state, it.reason = "not-needed", stop
        elif fetal_neg:
            it.state, it.reason = "not-needed", "cell-free fetal RHD negative: routine antenatal anti-D not needed"
            if p.get("routine.targeted_shared_decision"):
                it.reason += "; it may still be offered after a shared decision with her"
            it.related_id = pl.fetal["cffdna_id"]
        elif pl.partner_negative and p.get("routine.partner_negative_skips_routine"):
            it.state = "not-needed"
            it.reason = ("the baby's father is RhD negative and paternity is certain: routine antenatal anti-D "
                         "not needed (profile setting routine.partner_negative_skips_routine); it may still be "
                         "offered after a shared decision with her: give it if she chooses to have it")
            it.related_id = pl.partner_id
        elif pl.born_at and pl.born_at < opens:
            it.state, it.reason = "not-needed", "born before this dose was due"
        elif pl.born_at:
            it.state, it.reason = "missed", "not given before the birth"
        elif status in ("ended-early",):
            it.state, it.reason = "not-needed", "the pregnancy ended early"
        else:
            it.state = window_state(pl.now, opens, closes, late)
            it.reason = {"not-yet-due": window, "due": "give now: " + window,
                         "overdue": "the on-time window has closed: give it now, a late dose is still worth giving "
                                    f"(until {format_ga(r.late_until_ga_days)})",
                         "missed": "not given in the window, and the late window has passed"}[it.state]
        if pl.partner_negative and it.state in OPEN_STATES:
            # Her informed choice (the profile lets her decline): the reason says so beside the dose.
            it.reason += ("; the baby's father is RhD negative and paternity is certain: after a shared "
                          "decision she may choose to decline it")
        if pl.rhd["managed_as"] in ("untyped", "retest") and it.state in OPEN_STATES:
            it.reason += "; only if RhD negative (typing not yet known)"
    if p.get("pre_dose_screen.required") and first is not None:
        _pre_dose_screen(pl, *first)


def _pre_dose_screen(pl: Planner, first_opens: datetime, first_closes: datetime, first_late: datetime) -> None:
    """The antibody screen sample taken before the (first) routine dose."""
    p = pl.p
    src = p.section_source("pre_dose_screen")
    sopens = pl.at_ga(p.ga("pre_dose_screen.opens_ga"))
    d1 = pl.assigned.get(routine_key(1))
    limit = d1[0].at if d1 else None
    it = pl.add(ItemCode.PRE_DOSE_SCREEN, "Antibody screen before the routine dose", "due", "", src,
                due=first_opens, opens=sopens, closes=limit or first_closes, late_until=None if limit else first_late)
    ok = [s for s in pl.h.of("screen") if parse_utc(s["sampled_at"]) >= sopens
          and (limit is None or parse_utc(s["sampled_at"]) <= limit)]
    r1 = pl.item(codes.routine_dose_code(1))
    if r1 is not None and r1.state == "not-needed":
        it.state, it.reason = "not-needed", r1.reason
    elif ok:
        s = ok[0]
        it.state, it.done_record_id, it.done_at = "done", s["id"], parse_utc(s["sampled_at"])
        it.timeliness = "on-time"
        it.reason = "sample taken before the routine dose"
    elif d1 and limit is not None:
        it.state, it.reason = "missed", "the routine dose was given before a screen sample was taken"
        it.closes = limit
        pl.alert(AlertCode.ROUTINE_BEFORE_SCREEN, "warning",
                 f"routine anti-D given {fmt(limit, pl.tz)} with no antibody screen sampled from "
                 f"{format_ga(p.ga('pre_dose_screen.opens_ga'))} before it: a later screen may show passive anti-D",
                 src, [d1[0].id])
    elif pl.born_at:
        it.state, it.reason = "not-needed" if pl.born_at < sopens else "missed", "birth came first"
    else:
        it.state = window_state(pl.now, sopens, first_closes, first_late)
        it.reason = (f"take the antibody screen sample from {format_ga(p.ga('pre_dose_screen.opens_ga'))}, "
                     f"before giving the first routine dose")
