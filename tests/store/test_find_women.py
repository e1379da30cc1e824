"""Finding women: duplicate check at registration and the search box."""
from __future__ import annotations

import pytest

from tests.conftest import FACILITY_ID, USERNAME


@pytest.fixture
def women(store, now):
    def add(name, **kw):
        return store.create("woman", {"name": name, **kw}, by=USERNAME, facility=FACILITY_ID, now=now).record
    return {
        "amina": add("Amina Test Wanjiru", birth_date="1994-05-02", phone="+254 700 000 001", register_no="ANC-0001"),
        "grace": add("Grace Example Otieno", birth_date="1990-01-15", phone="0711 111 222", register_no="ANC-0002"),
        "gracie": add("Gracie Sample Ouma", stated_age=31, phone="0733 333 444"),
    }


def test_similar_name_and_same_birth_date_is_a_possible_duplicate(store, women):
    hits = store.find_duplicates("amina  wanjiru test", birth_date="1994-05-02")
    assert [w["id"] for w in hits] == [women["amina"]["id"]]


def test_similar_name_and_same_phone_digits_is_a_possible_duplicate(store, women):
    hits = store.find_duplicates("Amína Test Wanjirú", phone="0700-000-001")  # accents, local format
    assert [w["id"] for w in hits] == [women["amina"]["id"]]


def test_similar_name_alone_is_not_a_duplicate(store, women):
    assert store.find_duplicates("Amina Test Wanjiru", birth_date="2001-01-01") == []
    assert store.find_duplicates("Amina Test Wanjiru") == []


def test_same_birth_date_with_another_name_is_not_a_duplicate(store, women):
    assert store.find_duplicates("Completely Different", birth_date="1994-05-02") == []


def test_search_tolerates_misspelt_names(store, women):
    assert women["amina"]["id"] in [w["id"] for w in store.search_women("amna wanjru")]
    assert [w["id"] for w in store.search_women("Otieno")] == [women["grace"]["id"]]


def test_search_by_register_number_and_phone_is_exact(store, women):
    assert [w["id"] for w in store.search_women("anc-0002")] == [women["grace"]["id"]]
    assert [w["id"] for w in store.search_women("0733333444")] == [women["gracie"]["id"]]
    assert store.search_women("0733333445") == []
    assert store.search_women("") == []
