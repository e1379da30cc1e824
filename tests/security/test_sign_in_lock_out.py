"""Wrong passwords lock an account: the lock is shown plainly, holds against the right password,
and is lifted by time or by an admin (page or CLI). A device that keeps failing waits."""
from __future__ import annotations

import re

from click.testing import CliRunner

from tests.security.world import PASSWORD, Client, make_world


class Clock:
    def __init__(self, t=1_800_000_000.0):
        self.t = t

    def __call__(self):
        return self.t


def _try(world, username, password):
    c = Client(world.app)
    return c.open("POST", "/signin", form={"username": username, "password": password})


def _world(tmp_path, **extra):
    clock = Clock()
    return make_world(tmp_path, SECURITY_CLOCK=clock, **extra), clock


def test_five_wrong_passwords_lock_the_account_and_the_page_says_until_when(tmp_path):
    world, clock = _world(tmp_path)
    for _ in range(4):
        r = _try(world, "midwife", "wrong password")
        assert r.status_code == 401 and "User name or password is wrong" in r.get_data(as_text=True)
    r = _try(world, "midwife", "wrong password")
    html = r.get_data(as_text=True)
    assert r.status_code == 423
    assert "locked after 5 wrong passwords" in html and "ask an administrator to unlock it" in html
    assert re.search(r"until \d\d:\d\d \(about 15 min\)", html)
    # The right password does not open a locked account.
    r = _try(world, "midwife", PASSWORD)
    assert r.status_code == 423 and "locked" in r.get_data(as_text=True)
    # Other accounts are not affected.
    assert _try(world, "nurse", PASSWORD).status_code == 302


def test_the_lock_is_lifted_by_time(tmp_path):
    world, clock = _world(tmp_path)
    for _ in range(5):
        _try(world, "midwife", "wrong password")
    clock.t += 14 * 60
    assert _try(world, "midwife", PASSWORD).status_code == 423
    clock.t += 2 * 60
    assert _try(world, "midwife", PASSWORD).status_code == 302
    assert world.users.get("midwife").failed == 0


def test_an_admin_lifts_the_lock_on_the_staff_page(tmp_path):
    world, clock = _world(tmp_path)
    for _ in range(5):
        _try(world, "nurse", "wrong password")
    admin = Client(world.app, "admin")
    page = admin.get("/admin/users").get_data(as_text=True)
    row = re.search(r'<tr data-user="nurse">.*?</tr>', page, re.S).group(0)
    assert "locked" in row and "/admin/users/nurse/unlock" in row
    r = admin.open("POST", "/admin/users/nurse/unlock", form={})
    assert r.status_code == 302
    assert _try(world, "nurse", PASSWORD).status_code == 302
    events = [e for e in world.users.log() if e["user"] == "nurse"]
    assert [e["action"] for e in events][-2:] == ["locked", "unlock"] and events[-1]["by"] == "admin"


def test_an_admin_lifts_the_lock_from_the_command_line(tmp_path):
    from clinic.cli.main import cli

    world, clock = _world(tmp_path)
    for _ in range(5):
        _try(world, "lab", "wrong password")
    res = CliRunner().invoke(cli, ["users", "list", "--data", str(world.data_dir)])
    assert re.search(r"^lab\s+lab\s+locked until", res.output, re.M), res.output
    res = CliRunner().invoke(cli, ["users", "unlock", "lab", "--data", str(world.data_dir)])
    assert res.exit_code == 0 and "unlocked" in res.output
    assert _try(world, "lab", PASSWORD).status_code == 302


def test_a_success_resets_the_count(tmp_path):
    world, clock = _world(tmp_path)
    for _ in range(4):
        _try(world, "midwife", "wrong password")
    assert _try(world, "midwife", PASSWORD).status_code == 302
    for _ in range(4):
        assert _try(world, "midwife", "wrong password").status_code == 401


def test_an_unknown_user_name_answers_like_a_wrong_password(tmp_path):
    world, clock = _world(tmp_path)
    r = _try(world, "nobody-here", "whatever")
    assert r.status_code == 401 and "User name or password is wrong" in r.get_data(as_text=True)


def test_a_device_that_keeps_failing_is_made_to_wait(tmp_path):
    world, clock = _world(tmp_path)
    from clinic.web.auth import DEVICE_FAILURES

    names = [f"nobody-{i}" for i in range(DEVICE_FAILURES)]
    for n in names:
        assert _try(world, n, "guess").status_code == 401
    r = _try(world, "midwife", PASSWORD)
    assert r.status_code == 429 and "Too many failed sign-ins from this device" in r.get_data(as_text=True)
    clock.t += 11 * 60
    assert _try(world, "midwife", PASSWORD).status_code == 302


def test_a_disabled_account_cannot_sign_in_and_its_sessions_end(tmp_path):
    world, clock = _world(tmp_path)
    nurse = Client(world.app, "nurse")
    admin = Client(world.app, "admin")
    assert admin.open("POST", "/admin/users/nurse/disable", form={}).status_code == 302
    assert nurse.get("/api/v1/session").status_code == 401
    r = _try(world, "nurse", PASSWORD)
    assert r.status_code == 403 and "disabled" in r.get_data(as_text=True)
    assert admin.open("POST", "/admin/users/nurse/enable", form={}).status_code == 302
    assert _try(world, "nurse", PASSWORD).status_code == 302
