"""Find a woman by name (spelling-tolerant), register number or phone; page and API."""
from __future__ import annotations

import pytest


@pytest.mark.parametrize("q", ["Amina Testcase", "amina testcse", "T-001", "0700111222"])
def test_find_by_name_register_number_or_phone(client, booked, q):
    html = client.get(f"/find?q={q}").get_data(as_text=True)
    assert "Amina Testcase" in html
    assert f'href="/women/{booked["woman"]["id"]}"' in html
    assert f'href="/pregnancies/{booked["pregnancy"]["id"]}"' in html


def test_find_nobody_says_what_to_try(client, booked):
    html = client.get("/find?q=Zzyzx").get_data(as_text=True)
    assert "No woman found" in html and "register a booking" in html


def test_find_page_without_query_shows_the_form(client):
    html = client.get("/find").get_data(as_text=True)
    assert 'name="q"' in html and "No woman found" not in html


def test_api_women_search(client, booked):
    j = client.get("/api/v1/women?q=amina").get_json()
    assert [w["id"] for w in j["women"]] == [booked["woman"]["id"]]
    assert j["women"][0]["url"] == f"/women/{booked['woman']['id']}"


def test_api_women_needs_q(client):
    r = client.get("/api/v1/women")
    assert r.status_code == 422 and "q" in r.get_json()["errors"]
