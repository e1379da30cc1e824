"""A missing or wrong CSRF token is refused on every state change (every route but GET), by a
role that may otherwise do it, and nothing is stored."""
from __future__ import annotations

import pytest

from tests.security.test_role_table import CASES, PUBLIC, _fill
from tests.security.world import USERS, Client, make_world, new_id

WRITES = [c for c in CASES if c.method not in ("GET", "HEAD")]


def _role_for(case) -> str:
    if case.allowed == PUBLIC:
        return "midwife"
    return "clinician" if "clinician" in case.allowed else sorted(case.allowed)[0]


def _state(world) -> tuple:
    users = (world.data_dir / "users.json").read_bytes()
    return len(world.store.audit()), users, sorted(p.name for p in (world.data_dir / "exports").glob("*")) \
        if (world.data_dir / "exports").is_dir() else []


@pytest.mark.parametrize("token", [False, "not-the-token"], ids=["missing", "wrong"])
def test_every_state_change_needs_the_session_token(tmp_path, token):
    world = make_world(tmp_path)
    wrong = []
    for case in WRITES:
        role = _role_for(case)
        client = Client(world.app, USERS[role]) if case.allowed != PUBLIC else Client(world.app)
        before = _state(world)
        json = _fill(case.json, world) if case.json is not None else None
        if json is not None and "fields" in json:
            json["id"] = new_id()
        r = client.open(case.method, _fill(case.url, world), form=_fill(case.form, world), json=json, token=token)
        if r.status_code != 403:
            wrong.append(f"{case} as {role}: {r.status_code}")
        elif "token" not in r.get_data(as_text=True):
            wrong.append(f"{case} as {role}: 403 without saying the token is missing")
        if _state(world) != before:
            wrong.append(f"{case} as {role}: something was stored")
        if case.allowed != PUBLIC and client.get("/api/v1/session").status_code != 200:
            wrong.append(f"{case} as {role}: the session ended without its token")
    assert not wrong, "\n".join(wrong)


def test_the_token_of_another_session_is_refused(tmp_path):
    world = make_world(tmp_path)
    a, b = Client(world.app, "midwife"), Client(world.app, "nurse")
    assert a.token != b.token
    r = a.open("POST", "/api/v1/records", json={"kind": "referral", "pregnancy_id": world.pid, "id": new_id(),
                                                "fields": {"referred_on": "2026-01-01", "to_facility": "X",
                                                           "reason": "y"}}, token=b.token)
    assert r.status_code == 403
