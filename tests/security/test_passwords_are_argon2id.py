"""Passwords are hashed with Argon2id (argon2-cffi); an older hash (werkzeug's, from a
config.toml account, or Argon2 with weaker settings) is replaced at the next sign-in."""
from __future__ import annotations

import json
import time

from werkzeug.security import generate_password_hash

from clinic.accounts import passwords
from clinic.accounts.users import UserStore
from tests.security.world import CONFIG, Client, make_data_dir


def test_the_real_cost_is_argon2id_with_the_rfc_9106_low_memory_settings():
    # The tests hash cheaply (tests/conftest.py); the shipped defaults are these.
    p = passwords.Params()
    assert (p.time_cost, p.memory_cost, p.parallelism) == (3, 65536, 4)


def test_a_new_hash_is_argon2id_and_verifies():
    h = passwords.hash_password("correct horse")
    assert h.startswith("$argon2id$v=19$")
    assert passwords.verify(h, "correct horse") == (True, False)
    assert passwords.verify(h, "wrong horse") == (False, False)


def test_an_older_werkzeug_hash_verifies_and_asks_to_be_replaced():
    for method in ("pbkdf2:sha256:1000", "scrypt"):
        h = generate_password_hash("correct horse", method=method)
        assert passwords.verify(h, "correct horse") == (True, True)
        assert passwords.verify(h, "wrong") == (False, False)
    assert passwords.verify("not a hash", "x") == (False, False)


def test_a_config_toml_account_is_rehashed_into_users_json_at_sign_in(tmp_path):
    from clinic.web import create_app

    d = make_data_dir(tmp_path)
    (d / "users.json").unlink()
    old = generate_password_hash("an old password", method="pbkdf2:sha256:1000")
    (d / "config.toml").write_text(CONFIG + f'''
[[accounts]]
username = "oldtimer"
display_name = "From an older config"
role = "midwife"
password_hash = "{old}"
''', encoding="utf-8")
    app = create_app(d, test_config={"TESTING": True})
    assert app.extensions["rhledger"]["users"].get("oldtimer").source == "config"
    c = Client(app, "oldtimer", password="an old password")
    assert c.get("/api/v1/session").get_json()["user"]["role"] == "midwife"
    stored = json.loads((d / "users.json").read_text())["users"]["oldtimer"]
    assert stored["password_hash"].startswith("$argon2id$")
    assert oct((d / "users.json").stat().st_mode & 0o777) == "0o600"
    assert [(e["action"], e["user"]) for e in UserStore(d).log()][-1] == ("rehash", "oldtimer")
    Client(app, "oldtimer", password="an old password")  # still the same password


def test_an_argon2_hash_with_weaker_settings_is_replaced(tmp_path, monkeypatch):
    d = make_data_dir(tmp_path)
    users = UserStore(d)
    weak = passwords.Params(time_cost=1, memory_cost=8, parallelism=1)
    monkeypatch.setattr(passwords, "PARAMS", weak)
    users.add("weakling", "nurse", password="weak settings", by="test", now=time.time())
    monkeypatch.setattr(passwords, "PARAMS", passwords.Params(time_cost=2, memory_cost=16, parallelism=1))
    res = users.authenticate("weakling", "weak settings", now=time.time())
    assert res.ok and res.rehashed
    assert "m=16,t=2,p=1" in users.get("weakling").password_hash


def test_no_hash_or_password_is_in_what_the_admin_page_shows(tmp_path):
    from clinic.web import create_app

    d = make_data_dir(tmp_path)
    app = create_app(d, test_config={"TESTING": True})
    html = Client(app, "admin").get("/admin/users").get_data(as_text=True)
    assert "$argon2" not in html and "password_hash" not in html


def test_a_short_new_password_is_refused_with_the_rule(tmp_path):
    from clinic.web import create_app

    d = make_data_dir(tmp_path)
    app = create_app(d, test_config={"TESTING": True})
    from tests.security.world import PASSWORD

    c = Client(app, "nurse")
    r = c.open("POST", "/account/password", form={"current": PASSWORD, "new": "short", "again": "short"})
    assert r.status_code == 422 and "at least 8 characters" in r.get_data(as_text=True)
