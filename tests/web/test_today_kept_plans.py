"""Today keeps each pregnancy's plan between visits (clinic.reports.case_cache) and shows what
planning every pregnancy afresh shows: after a write to her record, after a write to an earlier
pregnancy of the same woman (its missed dose travels to her next booking), and later in time."""
from __future__ import annotations

from datetime import datetime, timedelta, timezone

from clinic.care_inputs import plan_from_settings
from clinic.web import worklist
from tests.web.conftest import at_ago, days_ago


def _fresh(app, store) -> tuple[list, list]:
    """What Today would list if every pregnancy were planned now, as a record page plans it."""
    now = app.config.get("RHLEDGER_NOW") or datetime.now(timezone.utc)
    items, alerts = [], []
    for p in store.pregnancies():
        if p.get("status") not in worklist.ACTIVE_STATUS or p.get("voided"):
            continue
        plan = plan_from_settings(store.settings, store.history(p["id"]), now, store=store)
        alerts += [(p["id"], a.code) for a in plan.alerts if a.severity in ("danger", "warning")]
        items += [(p["id"], i.code, i.state) for i in plan.items if i.state in ("due", "overdue")]
    return sorted(items), sorted(alerts)


def _today(app) -> tuple[list, list]:
    with app.test_request_context("/"):
        wl = worklist.build("all")
    items = sorted((r["pregnancy"]["id"], r["item"].code, r["item"].state) for r in wl["rows"]
                   if r["item"].state in ("due", "overdue"))
    alerts = sorted((a["pregnancy"]["id"], a["alert"].code) for a in wl["alerts"] if hasattr(a["alert"], "code"))
    return items, alerts


def test_today_from_kept_plans_matches_planning_afresh(app, client, store, booked):
    pid, wid = booked["pregnancy"]["id"], booked["woman"]["id"]
    assert _today(app) == _fresh(app, store)
    # A birth with no dose: the dose is due now, then missed; her next pregnancy carries it.
    store.create("birth", {"born_at": at_ago(days=15), "outcome": "live-birth", "baby_rhd": "positive",
                           "dat": "negative"}, by="mwangi", facility="test-clinic", pregnancy_id=pid)
    assert _today(app) == _fresh(app, store)
    store.amend(pid, {"status": "delivered"}, by="mwangi", reason="birth recorded")
    new = store.create("pregnancy", {"booked_on": days_ago(0), "lmp": days_ago(60), "status": "ongoing",
                                     "gravidity": 3, "parity": 2}, by="mwangi", facility="test-clinic",
                       woman_id=wid).record
    items, alerts = _today(app)
    assert (items, alerts) == _fresh(app, store)
    assert (new["id"], "earlier-dose-missed") in alerts
    # The missed dose recorded late in the earlier pregnancy: her new pregnancy's plan is made again.
    store.create("dose", {"given_at": at_ago(hours=2), "amount": 1500, "unit": "IU", "route": "IM",
                          "product": "Anti-D 1500", "lot": "LATE-1", "lot_expiry": "2028-01-31",
                          "indication": "postpartum", "given_by": "mwangi"},
                 by="mwangi", facility="test-clinic", pregnancy_id=pid)
    assert _today(app) == _fresh(app, store)
    # Later on, without any write: plans past a turning point are made again, the rest kept.
    app.config["RHLEDGER_NOW"] = datetime.now(timezone.utc) + timedelta(days=20)
    assert _today(app) == _fresh(app, store)
