"""`rhledger init` makes the admin account (a password typed, or a one-time password printed once
and changed at first sign-in); `rhledger users add|list|disable|enable|reset|unlock|role|roles`."""
from __future__ import annotations

import json
import re

from click.testing import CliRunner

from clinic.accounts.users import UserStore
from clinic.cli.main import cli
from tests.security.world import Client


def run(*args, input=None):
    return CliRunner().invoke(cli, [str(a) for a in args], input=input)


def _app(d):
    from clinic.web import create_app

    return create_app(d, test_config={"TESTING": True})


def test_init_with_a_one_time_password_prints_it_once_and_asks_for_a_new_one(tmp_path):
    d = tmp_path / "fresh"
    res = run("init", "--data", d, "--facility-id", "otp-1", "--one-time-password")
    assert res.exit_code == 0, res.output
    otp = re.search(r"One-time password for admin: ([a-z0-9-]{19})", res.output).group(1)
    assert otp not in (d / "users.json").read_text()
    user = UserStore(d).get("admin")
    assert user.role == "admin" and user.must_change and user.password_hash.startswith("$argon2id$")
    app = _app(d)
    c = Client(app)
    r = c.open("POST", "/signin", form={"username": "admin", "password": otp})
    assert r.headers["Location"].endswith("/account/password")


def test_init_prompts_for_the_password_when_none_is_given(tmp_path):
    d = tmp_path / "typed"
    res = run("init", "--data", d, "--facility-id", "typed-1", input="a typed secret\na typed secret\n")
    assert res.exit_code == 0 and "a typed secret" not in res.output
    assert not UserStore(d).get("admin").must_change
    assert Client(_app(d), "admin", password="a typed secret").get("/admin/users").status_code == 200


def test_users_add_list_disable_enable_reset_and_role(tmp_path):
    d = tmp_path / "site"
    assert run("init", "--data", d, "--facility-id", "site-1", "--password", "admin secret 1").exit_code == 0
    res = run("users", "add", "amina", "--role", "midwife", "--display-name", "Amina (midwife)", "--data", d)
    assert res.exit_code == 0, res.output
    otp = re.search(r"One-time password for amina \(new account\): (\S+)", res.output).group(1)
    res = run("users", "list", "--json", "--data", d)
    rows = {r["username"]: r for r in json.loads(res.output)}
    assert rows["amina"]["role"] == "midwife" and rows["amina"]["must_change"]
    assert "password_hash" not in res.output
    assert run("users", "add", "amina", "--role", "nurse", "--data", d).exit_code == 1
    assert "already an account" in run("users", "add", "amina", "--role", "nurse", "--data", d).output
    bad = run("users", "add", "Amina Big", "--role", "nurse", "--data", d)
    assert bad.exit_code == 1 and "lower-case letters" in bad.output
    bad = run("users", "add", "x", "--role", "wizard", "--data", d)
    assert bad.exit_code == 2 and "wizard" in bad.output

    app = _app(d)
    c = Client(app)
    assert c.open("POST", "/signin", form={"username": "amina", "password": otp}).status_code == 302
    assert run("users", "disable", "amina", "--data", d).exit_code == 0
    assert c.get("/api/v1/session").status_code == 401
    assert run("users", "enable", "amina", "--data", d).exit_code == 0
    res = run("users", "reset", "amina", "--data", d)
    new = re.search(r"One-time password for amina \(password reset\): (\S+)", res.output).group(1)
    assert new != otp
    assert run("users", "role", "amina", "clinician", "--data", d).exit_code == 0
    assert UserStore(d).get("amina").role == "clinician"
    log = [(e["action"], e["user"]) for e in UserStore(d).log()]
    assert [a for a, u in log if u == "amina"] == ["add", "disable", "enable", "reset", "role"]
    assert all(e["by"].startswith("cli") for e in UserStore(d).log() if e["user"] == "amina")


def test_the_last_admin_cannot_be_disabled_or_demoted(tmp_path):
    d = tmp_path / "site"
    run("init", "--data", d, "--facility-id", "site-2", "--password", "admin secret 1")
    res = run("users", "disable", "admin", "--data", d)
    assert res.exit_code == 1 and "only enabled admin" in res.output
    res = run("users", "role", "admin", "nurse", "--data", d)
    assert res.exit_code == 1 and "only enabled admin" in res.output


def test_users_roles_prints_the_one_table(tmp_path):
    res = run("users", "roles")
    assert res.exit_code == 0
    assert "clinician (Clinician):" in res.output
    block = res.output.split("district-officer (District officer):")[1].split("admin (")[0]
    assert "see the follow-up lists" in block and "see women and their records by name" not in block


def test_the_admin_adds_an_account_in_the_app_and_sees_the_one_time_password_once(tmp_path):
    d = tmp_path / "site"
    run("init", "--data", d, "--facility-id", "site-3", "--password", "admin secret 1")
    app = _app(d)
    admin = Client(app, "admin", password="admin secret 1")
    r = admin.open("POST", "/admin/users", form={"username": "kofi", "display_name": "Kofi", "role": "lab"})
    assert r.status_code == 201
    otp = re.search(r"<code>([a-z0-9-]{19})</code>", r.get_data(as_text=True)).group(1)
    assert otp not in admin.get("/admin/users").get_data(as_text=True)
    assert "no-store" in r.headers["Cache-Control"]
    c = Client(app)
    assert c.open("POST", "/signin", form={"username": "kofi", "password": otp}).status_code == 302
