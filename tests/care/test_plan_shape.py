"""plan.to_dict(): the contract other packages code against (DEVELOPERS.md, "Care engine")."""
import json
import re

from clinic.care import CAUTION
from tests.care.builders import birth, booked_negative, dose, event, make_plan, screen, utc

ISO_Z = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ$")


def _plan():
    e = event("2026-08-01T10:00:00Z", "abdominal-trauma", id="ev1")
    return make_plan(booked_negative() + [e, screen("2026-09-13T08:00:00Z"), dose("2026-09-13T09:00:00Z", 500),
                                          birth("2026-11-28T10:00:00Z", id="b1")], now=utc(2026, 11, 29))


def test_plan_fields():
    d = json.loads(json.dumps(_plan().to_dict()))
    assert {"profile_id", "profile_version", "dating", "rhd", "pathway", "fetal_rhd_probability", "items", "alerts",
            "caution"} <= set(d)
    assert {"edd", "method", "ga_days", "ga"} <= set(d["dating"])
    assert d["dating"]["edd"] == "2026-12-06" and d["dating"]["method"] == "lmp"
    assert {"recorded", "managed_as", "reason"} <= set(d["rhd"])
    assert d["caution"] == CAUTION


def test_item_and_alert_fields_and_utc_strings():
    d = _plan().to_dict()
    keys = {"code", "category", "title", "state", "due", "opens", "closes", "late_until", "dose_iu", "dose_ug",
            "reason", "source", "related_id", "done_record_id", "done_at", "timeliness"}
    codes = [i["code"] for i in d["items"]]
    assert {"booking-typing", "booking-screen", "pre-dose-screen", "routine-dose-1", "routine-dose-2",
            "event-dose:ev1", "event-fmh:ev1", "cord-typing", "postpartum-dose", "postpartum-fmh"} <= set(codes)
    for it in d["items"]:
        assert set(it) == keys
        assert it["reason"] and it["source"]
        for k in ("due", "opens", "closes", "late_until", "done_at"):
            assert it[k] is None or ISO_Z.match(it[k]), (k, it[k])
        if it["dose_iu"] is not None:
            assert it["dose_ug"] == it["dose_iu"] / 5
    for a in d["alerts"]:
        assert set(a) == {"code", "severity", "message", "source", "record_ids"}
        assert a["severity"] in ("danger", "warning", "info")


def test_caution_is_in_every_plan_and_says_what_it_must():
    assert "Decision support only" in CAUTION and "product label" in CAUTION and "local protocol" in CAUTION
    assert "licensed clinicians" in CAUTION and "local regulations" in CAUTION
