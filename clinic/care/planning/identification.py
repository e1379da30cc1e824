"""A positive antibody screen is never left unanswered.

A positive screen that names no antibody, or names one whose significance the profile does not
know, opens ``antibody-identification:<screen id>``: identify it (and titre or quantify it if it
is clinically significant), with an alert for a clinician. An anti-D found soon after
prophylaxis without a titre or quantitation opens ``anti-d-quantitation:<screen id>``: passive
or immune decides whether prophylaxis goes on. Either stays open (overdue once its week has
passed) until a later screen answers it; the birth does not close it, because the answer still
matters for the baby and for her next pregnancy. Routine prophylaxis is not held meanwhile: only
anti-D shown to be immune stops it (BSH 2016, White et al.).
"""
from __future__ import annotations

from collections.abc import Callable
from datetime import datetime, timedelta

from clinic.care import codes
from clinic.care.codes import AlertCode
from clinic.care.model import PlanItem
from clinic.care.planning.core import Planner, Record, fmt, window_state


def antibody_items(pl: Planner) -> None:
    """The identification and anti-D quantitation tasks of every unanswered positive screen."""
    screens = pl.h.of("screen")
    ab = pl.ab
    for first, answer, later_negative in _runs(screens, lambda s: s["id"] in ab.unidentified, _identifies(pl)):
        _identification(pl, first, answer, later_negative)
    undetermined = set(ab.undetermined)
    for first, answer, _negatives in _runs(screens, lambda s: s["id"] in undetermined, _judges_anti_d,
                                           negative_answers=True):
        _quantitation(pl, first, answer)


def _identifies(pl: Planner) -> Callable[[Record], bool]:
    """A positive screen whose every antibody is named and of known significance."""
    return lambda s: s.get("result") == "positive" and s["id"] not in pl.ab.unidentified


def _judges_anti_d(s: Record) -> bool:
    """A screen that settles whether an anti-D is passive or immune: no anti-D found any more, or
    anti-D with a titre, a quantitation or the laboratory's judgement."""
    if s.get("result") == "negative":
        return True
    if "anti-D" not in (s.get("antibodies") or []):
        return False
    return bool(s.get("anti_d_iu_ml") is not None or s.get("anti_d_origin")
                or (s.get("titre") and s.get("titre_antibody") == "anti-D"))


def _runs(screens: list[Record], opens: Callable[[Record], bool], answers: Callable[[Record], bool],
          negative_answers: bool = False) -> list[tuple[Record, Record | None, list[Record]]]:
    """(first screen that asks, the later screen that answers it or None, negative screens in
    between): one task for each run of asking screens, however many repeat the question."""
    out: list[tuple[Record, Record | None, list[Record]]] = []
    first: Record | None = None
    negatives: list[Record] = []
    for s in screens:
        if first is None:
            if opens(s):
                first, negatives = s, []
            continue
        if opens(s):
            continue
        if answers(s) and (negative_answers or s.get("result") != "negative"):
            out.append((first, s, negatives))
            first = None
        elif s.get("result") == "negative":
            negatives.append(s)
    if first is not None:
        out.append((first, None, negatives))
    return out


def _window(pl: Planner, s: Record) -> tuple[datetime, datetime]:
    t = pl.h.time[s["id"]]
    return t, t + timedelta(days=pl.p.get("antibody.identify_within_days"))


def _answered(pl: Planner, it: PlanItem, answer: Record, closes: datetime, words: str) -> None:
    done_at = pl.h.time[answer["id"]]
    it.state, it.done_record_id, it.done_at = "done", answer["id"], done_at
    it.timeliness = "on-time" if done_at <= closes else "late"
    it.reason = f"{words} on {fmt(done_at, pl.tz)[:10]}"


def _identification(pl: Planner, s: Record, answer: Record | None, later_negative: list[Record]) -> None:
    p = pl.p
    src = p.section_source("antibody")
    t, closes = _window(pl, s)
    day = fmt(t, pl.tz)[:10]
    it = pl.add(codes.antibody_identification_code(s["id"]), "Identify the antibody on the positive screen", "due",
                "", src, due=t, opens=t, closes=closes, late_until=None, related_id=s["id"])
    if answer is not None:
        named = ", ".join(f["antibody"] for f in pl.ab.findings if f["screen_id"] == answer["id"])
        _answered(pl, it, answer, closes, f"identified: {named}")
        return
    it.state = window_state(pl.now, t, closes, None)
    it.reason = (f"the antibody screen of {day} is positive but {pl.ab.unidentified[s['id']]}: ask the laboratory "
                 f"(or the reference laboratory) to identify it, and to titre or quantify it if it is clinically "
                 f"significant; record the result as a screen entry (or amend this one)")
    if later_negative:
        it.reason += (f"; a later screen on {fmt(pl.h.time[later_negative[-1]['id']], pl.tz)[:10]} was negative: "
                      f"ask the laboratory what the earlier reaction was")
    if it.state == "overdue":
        it.reason += f" (not identified within {p.get('antibody.identify_within_days')} days)"
    pl.alert(AlertCode.ANTIBODY_UNIDENTIFIED, "warning",
             f"antibody screen of {day} positive, antibody not identified ({pl.ab.unidentified[s['id']]}): a "
             f"clinician reviews her; ask the laboratory to identify it (titre or quantify it if clinically "
             f"significant). Anti-D prophylaxis continues as planned until anti-D is shown to be immune",
             src, [s["id"]])


def _quantitation(pl: Planner, s: Record, answer: Record | None) -> None:
    src = pl.p.section_source("antibody")
    t, closes = _window(pl, s)
    it = pl.add(codes.anti_d_quantitation_code(s["id"]), "Quantify the anti-D: passive or immune?", "due", "", src,
                due=t, opens=t, closes=closes, late_until=None, related_id=s["id"])
    if answer is not None:
        _answered(pl, it, answer, closes, "no anti-D found any more" if answer.get("result") == "negative"
                  else "anti-D quantified or judged")
        return
    it.state = window_state(pl.now, t, closes, None)
    it.reason = (f"anti-D found on {fmt(t, pl.tz)[:10]} soon after prophylaxis, without a titre or quantitation: "
                 f"ask the laboratory to quantify (IU/mL) or titre it so passive anti-D is told from immune; "
                 f"prophylaxis continues meanwhile")
