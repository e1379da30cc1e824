"""The day's worklist: due, overdue and soon-due plan items across the facility's pregnancies."""
from __future__ import annotations

from datetime import timedelta

from clinic.care.codes import OPEN_STATES, AlertCode, Category
from clinic.web.db import get_cases, get_settings, get_store, utcnow
from clinic.web.helpers import as_dt
from clinic.web.helpers import field_of as _get

SOON = timedelta(days=14)
FILTERS = {
    "all": "Everything",
    "routine-week": "Routine doses this week",
    "postpartum": "Postpartum",
    "events": "Events",
    "tests": "Typing and screens",
    "surveillance": "Surveillance",
}
# Pregnancies whose plans can still hold something to do here.
ACTIVE_STATUS = ("ongoing", "delivered", "ended-early")


def _matches(item, flt: str, now) -> bool:
    cat = _get(item, "category")
    if flt == "all":
        return True
    if flt == "routine-week":
        when = as_dt(_get(item, "due")) or as_dt(_get(item, "opens"))
        return cat == Category.ROUTINE and (when is None or when <= now + timedelta(days=7))
    if flt == "postpartum":
        return cat in (Category.POSTPARTUM, Category.BIRTH)
    if flt == "events":
        return cat == Category.EVENT
    if flt == "tests":
        return cat in (Category.SCREEN, Category.TYPING)
    if flt == "surveillance":
        return cat == Category.SURVEILLANCE
    raise ValueError(flt)


def cared_for_here(preg: dict, facility_id: str) -> bool:
    """Booked here, or brought here on her card (a woman who moved). Bundle copies (district) are not."""
    origin = preg.get("origin") or {}
    return preg.get("facility") == facility_id or origin.get("via") == "card"


def build(flt: str = "all") -> dict:
    """{"rows": [{item, woman, pregnancy}], "alerts": [...], "filter", "counts": {filter: rows}},
    most urgent first; "counts" gives the rows of every filter. Alerts come with the "all" filter
    (and a plan that could not be made, with every filter).

    The pregnancies and their plans come from the app's ``CaseCache`` (``clinic.reports.case_cache``,
    each planned with her earlier pregnancies, as ``db.plan_for`` does): only partitions written since
    the last look are read again, and only pregnancies whose records (or an earlier pregnancy's)
    changed, or whose plan no longer holds, are planned again."""
    if flt not in FILTERS:
        raise KeyError(flt)
    store, s = get_store(), get_settings()
    now = utcnow()
    candidates, alerts = [], []

    def here(woman: dict, preg: dict, entries: list[dict]) -> bool:
        return preg.get("status") in ACTIVE_STATUS and not preg.get("voided") and cared_for_here(preg, s.facility_id)

    failed: list = []
    cases = get_cases().cases(store, s, now=now, select=here, failed=failed).cases
    cases.sort(key=lambda c: (c.pregnancy.get("created_at") or "", c.id))  # the order they were booked in
    for woman, preg, message in failed:
        if not here(woman or {}, preg, []):
            continue
        # Said out loud, not skipped: this pregnancy's items cannot be shown until it is fixed.
        alerts.append({"alert": {"code": AlertCode.PLAN_FAILED, "severity": "danger", "source": "rhledger",
                                 "message": f"the plan could not be worked out ({message}); open her record "
                                            f"and check the entries"},
                       "woman": woman, "pregnancy": preg})
    for case in cases:
        woman, preg, plan = case.woman, case.pregnancy, case.plan
        for a in _get(plan, "alerts", ()) or ():
            if _get(a, "severity") in ("danger", "warning"):
                alerts.append({"alert": a, "woman": woman, "pregnancy": preg})
        for it in _get(plan, "items", ()) or ():
            state = _get(it, "state")
            if state not in OPEN_STATES:
                continue
            if state == "not-yet-due":
                start = as_dt(_get(it, "opens")) or as_dt(_get(it, "due"))
                if start is None or start > now + SOON:
                    continue
            candidates.append({"item": it, "woman": woman, "pregnancy": preg})
    far = now + timedelta(days=3650)

    def urgency(r):
        it = r["item"]
        state = _get(it, "state")
        rank = {"overdue": 0, "due": 1}.get(state, 2)
        # Overdue: the one whose late window ends soonest comes first (its deadline has passed, so
        # the time still left to act is what makes it urgent); otherwise the nearest deadline.
        late = as_dt(_get(it, "late_until")) if state == "overdue" else None
        return (rank, late or as_dt(_get(it, "closes")) or as_dt(_get(it, "due")) or far)

    candidates.sort(key=urgency)
    counts = {f: sum(1 for r in candidates if _matches(r["item"], f, now)) for f in FILTERS}
    rows = [r for r in candidates if _matches(r["item"], flt, now)]
    sev = {"danger": 0, "warning": 1}
    alerts.sort(key=lambda a: sev.get(_get(a["alert"], "severity"), 2))
    if flt != "all":  # a filtered list still says when a plan could not be made
        alerts = [a for a in alerts if _get(a["alert"], "code") == AlertCode.PLAN_FAILED]
    return {"rows": rows, "alerts": alerts, "filter": flt, "counts": counts, "now": now}
