"""Done when: the demo district officer imports the clinics' bundles, reads the month's coverage,
downloads CSV, PDF and FHIR, and finds the demo's missed doses listed by name."""
from __future__ import annotations

import io
import re
from datetime import datetime, timezone

import pytest

seed = pytest.importorskip("seed_demo.scenario")

from clinic.web import create_app  # noqa: E402
from seed_demo.stories import story  # noqa: E402

NOW = datetime(2026, 12, 1, 9, 0, tzinfo=timezone.utc)
# Stories of the demo built to show a postpartum dose missed last month, one per clinic.
MISSED = ("a-lm-missed", "b-lm-missed", "c-lm-missed")


@pytest.mark.slow
def test_demo_officer_finds_the_missed_doses_by_name(tmp_path):
    d = tmp_path / "district"
    summary = seed.build_site(d, "district", now=NOW)
    user, password, role = next(a for a in summary["accounts"] if a[2] == "district-officer")
    app = create_app(d, test_config={"TESTING": True, "RHLEDGER_NOW": NOW})
    c = app.test_client()
    token = re.search(r'name="csrf-token" content="([^"]+)"', c.get("/signin").get_data(as_text=True)).group(1)
    assert c.post("/signin", data={"username": user, "password": password, "csrf_token": token}).status_code == 302
    token = re.search(r'name="csrf-token" content="([^"]+)"',
                      c.get("/district/import").get_data(as_text=True)).group(1)   # a new session, a new token
    for b in summary["bundles"]:
        with open(b["file"], "rb") as fh:
            r = c.post("/district/import/file", data={"bundle": (io.BytesIO(fh.read()), b["file"].split("/")[-1])},
                       headers={"X-CSRF-Token": token}, content_type="multipart/form-data")
        assert r.status_code == 200, r.get_json()
    page = c.get("/district/").get_data(as_text=True)      # last month: November 2026
    assert "November 2026" in page and "complete as the data entered" in page and "<svg" in page
    for fmt, head in (("csv", b"month,"), ("pdf", b"%PDF-"), ("fhir", b"{")):
        r = c.get(f"/district/report.{fmt}")
        assert r.status_code == 200 and r.data.startswith(head)
    follow = c.get("/district/follow-up").get_data(as_text=True)
    for key in MISSED:
        assert story(key).name in follow, key
