"""Indicators of the outcome (new immune sensitisations) and of the anti-D used."""
from __future__ import annotations

from collections.abc import Iterator
from datetime import datetime, tzinfo

from clinic.care.codes import AlertCode
from clinic.records.values import parse_utc
from clinic.reports.indicators.registry import S_OUTCOME, S_USE, Hit, indicator
from clinic.reports.month import Month
from clinic.reports.pregnancy_case import Case, ReportError, attr


def _first_immune_anti_d(case: Case) -> dict | None:
    """The first screen the care engine judged immune anti-D (its 'immune-anti-d' alert names
    the screens), or None. The engine judges it, not the laboratory's field alone."""
    screens = []
    for a in case.alerts_with(AlertCode.IMMUNE_ANTI_D):
        for rid in attr(a, "record_ids") or []:
            s = case.entry(rid)
            if s is None or not s.get("sampled_at"):
                raise ReportError(f"care plan alert {AlertCode.IMMUNE_ANTI_D} of pregnancy {case.id} names screen "
                                  f"{rid!r}, which is not among its records")
            screens.append(s)
    return min(screens, key=lambda s: (s["sampled_at"], s["id"])) if screens else None


def prophylaxis_history(case: Case, before: datetime) -> list[dict]:
    """Anti-D doses of this pregnancy given before ``before`` (for the sensitisation list)."""
    out = []
    for d in sorted(case.of_kind("dose"), key=lambda d: d["given_at"]):
        if parse_utc(d["given_at"]) < before:
            out.append({"given_at": d["given_at"], "dose_iu": d.get("dose_iu"),
                        "indication": d.get("indication"), "lot": d.get("lot")})
    return out


@indicator("new_sensitisations", S_OUTCOME, "New immune anti-D found",
           "Pregnancies whose first antibody screen showing anti-D that the care engine judges "
           "immune (its 'immune-anti-d' alert: the laboratory's judgement where recorded, otherwise "
           "the engine's from the level and the doses given before) was sampled in the month. "
           "Each is listed with the anti-D doses "
           "of the pregnancy before it and the earlier anti-D history as recorded at booking.",
           "new immune sensitisations", None)
def _new_sens(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    s = _first_immune_anti_d(case)
    if s is None:
        return
    at = parse_utc(s["sampled_at"])
    if month.contains(at, tz):
        yield Hit(case, True, "immune anti-D", "new immune anti-D: refer for surveillance", None, at,
                  s["id"], {"titre": s.get("titre"), "doses_before": prophylaxis_history(case, at),
                            "prior_anti_d": case.pregnancy.get("prior_anti_d", ""),
                            "prior_sensitising": case.pregnancy.get("prior_sensitising", "")})


@indicator("antid_doses", S_USE, "Anti-D doses given",
           "Anti-D doses recorded as given in the month (any indication).", "doses", None)
def _doses(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    for d in case.of_kind("dose"):
        at = parse_utc(d["given_at"])
        if month.contains(at, tz):
            yield Hit(case, True, d.get("indication", ""), due=at, record_id=d["id"])
