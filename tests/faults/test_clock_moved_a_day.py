"""The laptop's clock moved a day back or a day forward: records keep their order (a later
amendment stays the later one even when its time reads earlier; the timeline and the plan go
by the times recorded), deadlines come from the recorded times, not from when the laptop saved
them, and every page warns while the clock reads earlier than what the store already saved."""
from __future__ import annotations

import json
import re
from datetime import datetime, timedelta, timezone

import pytest

from clinic.care.codes import ItemCode
from clinic.care_inputs import care_inputs, plan_from_settings
from clinic.store import Store
from clinic.web import create_app
from tests.load.harness import PASSWORD, USER, make_data_dir

TRUE_NOW = datetime(2026, 11, 20, 10, 0, tzinfo=timezone.utc)
DAY = timedelta(days=1)


def _utc(t: datetime) -> str:
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


class Laptop:
    """The web app with its clock set by hand (``clock``), and a signed-in test client."""

    def __init__(self, data_dir):
        self.app = create_app(data_dir, test_config={"TESTING": True, "RHLEDGER_NOW": TRUE_NOW})
        self.client = self.app.test_client()
        page = self.client.get("/signin").get_data(as_text=True)
        token = re.search(r'name="csrf_token" value="([^"]+)"', page).group(1)
        assert self.client.post("/signin", data={"csrf_token": token, "username": USER,
                                                 "password": PASSWORD}).status_code == 302
        self.csrf = self.client.get("/api/v1/session").get_json()["csrf_token"]
        self.store = self.app.extensions["rhledger"]["store"]

    def clock(self, t: datetime) -> None:
        self.app.config["RHLEDGER_NOW"] = t

    def post(self, path, body, method="POST"):
        r = self.client.open(path, method=method, json=body, headers={"X-CSRF-Token": self.csrf})
        assert r.status_code in (200, 201), (r.status_code, r.get_json())
        return r.get_json()

    def book(self, lmp_days_ago: int) -> tuple[str, str]:
        today = self.app.config["RHLEDGER_NOW"].date()
        out = self.post("/api/v1/bookings", {
            "woman": {"fields": {"name": "Clocktest Woman", "stated_age": 29, "village": "Testvale"}},
            "pregnancy": {"fields": {"booked_on": (today - timedelta(days=lmp_days_ago - 70)).isoformat(),
                                     "lmp": (today - timedelta(days=lmp_days_ago)).isoformat(),
                                     "status": "ongoing", "gravidity": 2, "parity": 1}},
            "typing": {"fields": {"abo": "O", "rhd": "negative", "tested_on": today.isoformat()}},
            "confirm_not_duplicate": True})
        return out["records"]["woman"]["id"], out["records"]["pregnancy"]["id"]

    def record(self, kind: str, wid: str, pid: str, fields: dict) -> dict:
        return self.post("/api/v1/records", {"kind": kind, "woman_id": wid, "pregnancy_id": pid,
                                             "fields": fields})["record"]

    def warning_on_pages(self) -> str | None:
        html = self.client.get("/").get_data(as_text=True)
        m = re.search(r'<p class="clock-warning" role="alert">([^<]*)<', html)
        api = self.client.get("/api/v1/session").get_json()["clock_warnings"]
        assert (m is None) == (not api), "the page and the API disagree about the clock"
        return m.group(1) if m else None


@pytest.fixture
def laptop(tmp_path):
    return Laptop(make_data_dir(tmp_path / "data"))


def test_clock_a_day_back_warns_and_keeps_the_order(laptop, tmp_path):
    wid, pid = laptop.book(lmp_days_ago=200)
    dose = laptop.record("dose", wid, pid, {"given_at": _utc(TRUE_NOW - timedelta(hours=1)), "amount": 1500,
                                            "unit": "IU", "route": "IM", "product": "Anti-D 1500", "lot": "LOT-A",
                                            "lot_expiry": "2028-01-31", "indication": "routine-antenatal",
                                            "given_by": "midwife"})
    v2 = laptop.post(f"/api/v1/records/{dose['id']}", {"changes": {"lot": "LOT-B"}, "reason": "misread",
                                                       "expected_version": 1}, method="PATCH")["record"]
    assert laptop.warning_on_pages() is None

    laptop.clock(TRUE_NOW - DAY)          # the battery ran flat: the laptop thinks it is yesterday
    warning = laptop.warning_on_pages()
    assert warning and "behind" in warning and "Set the date and time" in warning
    screen = laptop.record("screen", wid, pid, {"sampled_at": _utc(TRUE_NOW - DAY - timedelta(hours=2)),
                                                "result": "negative"})
    v3 = laptop.post(f"/api/v1/records/{dose['id']}", {"changes": {"lot": "LOT-C"}, "reason": "second look",
                                                       "expected_version": 2}, method="PATCH")["record"]
    assert v3["amended_at"] >= v2["amended_at"]   # a change is never dated before what it changes ...
    stored = laptop.store.get(dose["id"])
    assert stored["version"] == 3 and stored["lot"] == "LOT-C"   # ... and stays the later one
    assert [a["changes"]["lot"]["new"] for a in stored["amendments"]] == ["LOT-B", "LOT-C"]
    # The audit file keeps the order the changes were made in.
    lines = [json.loads(x) for f in sorted((laptop.store.data_dir / "audit").glob("*/*.jsonl"))
             for x in f.read_text().splitlines()]
    assert [a["version"] for a in lines if a["id"] == dose["id"]] == [1, 2, 3]
    # A district that gets the two versions in either order keeps version 3.
    for order in ((v2, v3), (v3, v2)):
        district = Store(make_data_dir(tmp_path / f"district-{order[0]['version']}"))
        for r in (laptop.store.get(wid), laptop.store.get(pid), *order):
            district.merge_foreign(r, now=TRUE_NOW + DAY)
        assert district.get(dose["id"])["lot"] == "LOT-C"
    # The plan and the timeline go by the times recorded: the screen (sampled yesterday) before the dose.
    plan = plan_from_settings(laptop.store.settings, laptop.store.history(pid), TRUE_NOW)
    done = {i.code: i.done_record_id for i in plan.items if i.state == "done"}
    assert dose["id"] in done.values()
    html = laptop.client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    assert html.index(dose["id"]) < html.index(screen["id"]), "the timeline (newest first) follows recorded times"

    laptop.clock(TRUE_NOW + timedelta(minutes=5))   # set right again
    assert laptop.warning_on_pages() is None


def test_clock_a_day_ahead_deadlines_come_from_the_recorded_birth(laptop):
    laptop.clock(TRUE_NOW + DAY)          # the laptop runs a day fast
    wid, pid = laptop.book(lmp_days_ago=280)
    born = TRUE_NOW - timedelta(hours=2)  # what the midwife writes down
    birth = laptop.record("birth", wid, pid, {"born_at": _utc(born), "outcome": "live-birth", "baby_rhd": "positive",
                                              "dat": "negative", "cord_sampled": True})
    assert birth["created_at"] == _utc(TRUE_NOW + DAY)
    hours = care_inputs(laptop.store.settings)[0].get("postpartum.deadline_hours")  # 72 in bsh-2014
    for now in (TRUE_NOW, TRUE_NOW + DAY):  # judged by the true time, or by the fast clock
        plan = plan_from_settings(laptop.store.settings, laptop.store.history(pid), now)
        item = next(i for i in plan.items if i.code == ItemCode.POSTPARTUM_DOSE)
        assert item.closes == born + timedelta(hours=hours), "the deadline runs from the birth, not from saving"
        assert item.state == "due"
    laptop.clock(TRUE_NOW)                # the clock put right: it now reads earlier than what was saved
    warning = laptop.warning_on_pages()
    assert warning and "1 d behind" in warning
