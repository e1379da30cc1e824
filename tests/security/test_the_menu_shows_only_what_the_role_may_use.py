"""The menu, and the buttons on a record, show only what the role may use; a district officer
sees names only on the follow-up lists."""
from __future__ import annotations

import re

import pytest

from tests.security.world import Client, make_world

MENU = {
    "midwife": ["Today", "Find", "Book", "Calculators", "Stock", "Supply", "Cards", "District"],
    "nurse": ["Today", "Find", "Book", "Calculators", "Stock", "Supply", "Cards", "District"],
    "clinician": ["Today", "Find", "Book", "Calculators", "Stock", "Supply", "Cards", "District"],
    "lab": ["Today", "Find", "Calculators", "Stock", "Supply", "Cards", "District"],
    "district-officer": ["Stock", "Supply", "District"],
    "admin": ["Staff", "Audit"],
}


def _menu(html: str) -> list[str]:
    nav = re.search(r'<nav class="mainnav".*?</nav>', html, re.S).group(0)
    return re.findall(r">([^<]+)</a>", nav)


@pytest.mark.parametrize("role", list(MENU))
def test_the_menu_of_each_role(tmp_path, role):
    world = make_world(tmp_path)
    c = Client(world.app, role)
    start = {"district-officer": "/stock", "admin": "/admin/users"}.get(role, "/calc/")
    r = c.get(start)
    assert _menu(r.get_data(as_text=True)) == MENU[role]
    for label in MENU[role]:
        href = re.search(rf'<a href="([^"]+)"[^>]*>{label}</a>', r.get_data(as_text=True)).group(1)
        assert c.get(href).status_code in (200, 302), (role, label)


def test_the_record_offers_only_the_entries_the_role_may_write(tmp_path):
    world = make_world(tmp_path)
    links = {}
    for role in ("midwife", "clinician", "lab"):
        html = Client(world.app, role).get(f"/pregnancies/{world.pid}").get_data(as_text=True)
        links[role] = set(re.findall(rf'href="/pregnancies/{world.pid}/add/([a-z_]+)"', html))
    assert {"doppler", "fbs", "iut"} <= links["clinician"]
    assert not {"doppler", "fbs", "iut"} & links["midwife"] and {"dose", "event", "referral"} <= links["midwife"]
    assert links["lab"] == {"typing", "partner_typing", "fetal_rhd", "screen", "fmh"}
    lab = Client(world.app, "lab").get(f"/pregnancies/{world.pid}").get_data(as_text=True)
    assert f'/records/{world.ids["dose"]}/amend' not in lab and f'/records/{world.ids["typing"]}/amend' in lab
    assert "Her card (QR)" not in lab and "Amend pregnancy" not in lab


def test_a_district_officer_sees_names_only_on_the_follow_up_lists(tmp_path):
    world = make_world(tmp_path)
    officer = Client(world.app, "district-officer")
    name = "Invented-Testcase"
    for url in ("/", "/district/", "/district/export", "/stock", "/district/import"):
        r = officer.get(url)
        assert r.status_code in (200, 302) and name not in r.get_data(as_text=True), url
    for url in ("/find?q=Zuri", f"/women/{world.wid}", f"/pregnancies/{world.pid}", "/api/v1/worklist",
                f"/api/v1/records/{world.wid}", "/cards/", f"/cards/pregnancy/{world.pid}"):
        r = officer.get(url)
        assert r.status_code == 403 and name not in r.get_data(as_text=True), url
    assert officer.get("/district/follow-up").status_code == 200
    assert officer.get("/district/report.follow-up").status_code == 200
