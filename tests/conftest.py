"""Shared fixtures: a data directory with a config.toml, a Store on it, and a fixed aware `now`.

Everything is invented: the facility, the user and every person in the tests.
"""
from __future__ import annotations

from datetime import datetime, timezone
from pathlib import Path

import pytest

FACILITY_ID = "test-clinic"
USERNAME = "midwife1"
PASSWORD = "correct horse battery"
# A fixed instant: 16 March 2026, 09:30 UTC (12:30 in the facility's zone, Africa/Nairobi, UTC+3).
NOW = datetime(2026, 3, 16, 9, 30, tzinfo=timezone.utc)

CONFIG_TEMPLATE = """\
[facility]
id = "{facility_id}"
name = "Hillside Test Clinic"
kind = "clinic"
phone = "+000 000 0000"
district = "Test District"
timezone = "Africa/Nairobi"

[care]
profile = "bsh-2014"
rhd_negative_frequency = 0.15
maternal_blood_volume_ml = 5000

[stock]
products = [
  {{ name = "Anti-D 1500 IU (300 ug)", vial_iu = 1500, routes = ["IM", "IV"] }},
  {{ name = "Anti-D 1250 IU (250 ug)", vial_iu = 1250, routes = ["IM"] }},
]

[backup]
keep = 5

[[accounts]]
username = "{username}"
display_name = "Test Midwife"
role = "midwife"
password_hash = "{password_hash}"
"""


@pytest.fixture(scope="session")
def password_hash() -> str:
    from werkzeug.security import generate_password_hash

    return generate_password_hash(PASSWORD)


def write_config(data_dir: Path, password_hash: str, facility_id: str = FACILITY_ID) -> Path:
    data_dir.mkdir(parents=True, exist_ok=True)
    path = data_dir / "config.toml"
    path.write_text(CONFIG_TEMPLATE.format(facility_id=facility_id, username=USERNAME,
                                           password_hash=password_hash), encoding="utf-8")
    return path


@pytest.fixture(autouse=True, scope="session")
def _cheap_password_hashing():
    """Argon2id with the smallest cost in tests: they sign in hundreds of times. The real cost
    (clinic.accounts.passwords.Params defaults) is checked in tests/security."""
    from clinic.accounts import passwords

    real = passwords.PARAMS
    passwords.PARAMS = passwords.Params(time_cost=1, memory_cost=8, parallelism=1)
    yield
    passwords.PARAMS = real


@pytest.fixture
def now() -> datetime:
    """A fixed, timezone-aware now (2026-03-16 09:30 UTC)."""
    return NOW


@pytest.fixture
def data_dir(tmp_path, password_hash) -> Path:
    """A fresh data directory holding a config.toml (facility "test-clinic", Africa/Nairobi)."""
    d = tmp_path / "instance"
    write_config(d, password_hash)
    return d


@pytest.fixture
def settings(data_dir):
    from clinic.config import load_settings

    return load_settings(data_dir)


@pytest.fixture
def store(data_dir):
    """An empty Store on the data directory."""
    from clinic.store import Store

    return Store(data_dir)


@pytest.fixture
def woman(store, now) -> dict:
    """One registered woman (invented)."""
    return store.create("woman", {"name": "Amina Test Wanjiru", "birth_date": "1994-05-02",
                                  "phone": "0700 000 001", "village": "Upper Ridge", "register_no": "ANC-0001"},
                        by=USERNAME, facility=FACILITY_ID, now=now).record


@pytest.fixture
def pregnancy(store, woman, now) -> dict:
    """An ongoing pregnancy of `woman`, booked 2026-03-02 with LMP 2025-12-15 (11+0 at booking)."""
    return store.create("pregnancy", {"booked_on": "2026-03-02", "lmp": "2025-12-15", "gravidity": 2,
                                      "parity": 1, "status": "ongoing"},
                        by=USERNAME, facility=FACILITY_ID, woman_id=woman["id"], now=now).record
