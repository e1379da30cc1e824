"""The store commands: init, backup, restore, check, list (through click's CliRunner)."""
from __future__ import annotations

import json
import subprocess
import sys

import pytest
from click.testing import CliRunner

from clinic.cli.main import cli
from clinic.config import load_settings
from clinic.store import Store
from tests.conftest import FACILITY_ID, USERNAME

STORE_COMMANDS = ("init", "backup", "restore", "check", "list")


def run(*args, input=None):
    return CliRunner().invoke(cli, list(map(str, args)), input=input)


@pytest.mark.parametrize("name", STORE_COMMANDS)
def test_every_store_command_has_help_and_a_data_option(name):
    res = run(name, "--help")
    assert res.exit_code == 0, res.output
    assert "--data" in res.output
    assert cli.commands[name].help and len(cli.commands[name].help.strip()) > 20


def test_init_writes_config_store_and_key(tmp_path):
    d = tmp_path / "new"
    res = run("init", "--data", d, "--facility-id", "hill-1", "--facility-name", "Hill Clinic",
              "--timezone", "Africa/Kampala", "--user", "nurse", "--password", "long enough pw")
    assert res.exit_code == 0, res.output
    assert "fingerprint" in res.output.lower()
    s = load_settings(d)
    assert (s.facility_id, s.facility_name, s.timezone, s.profile) == (
        "hill-1", "Hill Clinic", "Africa/Kampala", "bsh-2014")
    from clinic.accounts.passwords import verify
    from clinic.accounts.users import UserStore
    (acct,) = UserStore(d).all()  # accounts live in users.json, hashed with Argon2id
    assert acct.username == "nurse" and acct.password_hash.startswith("$argon2id$")
    assert verify(acct.password_hash, "long enough pw")[0]
    assert s.products and s.backups_keep == 14
    assert (d / "records" / "store.json").exists()
    Store(d)


def test_init_prompts_for_a_hidden_password(tmp_path):
    d = tmp_path / "p"
    res = run("init", "--data", d, "--facility-id", "hill-2", input="pw123456\npw123456\n")
    assert res.exit_code == 0, res.output
    assert "pw123456" not in res.output


def test_init_refuses_to_overwrite_a_config(data_dir):
    before = (data_dir / "config.toml").read_bytes()
    res = run("init", "--data", data_dir, "--facility-id", "other", "--password", "12345678")
    assert res.exit_code != 0 and "already exists" in res.output
    assert (data_dir / "config.toml").read_bytes() == before


def test_init_with_a_bad_value_names_it_and_writes_nothing(tmp_path):
    d = tmp_path / "bad"
    res = run("init", "--data", d, "--facility-id", "has space", "--password", "12345678")
    assert res.exit_code != 0 and "facility.id" in res.output
    res = run("init", "--data", d, "--facility-id", "ok", "--timezone", "Mars/Base", "--password", "12345678")
    assert res.exit_code != 0 and "timezone" in res.output
    assert not (d / "config.toml").exists()


def test_init_with_the_key_call_patched(tmp_path, monkeypatch):
    import clinic.signing.keys as keys

    class Fake:
        fingerprint = "ABCD 1234"
    monkeypatch.setattr(keys, "ensure_facility_key", lambda data_dir, facility_id: Fake())
    res = run("init", "--data", tmp_path / "k", "--facility-id", "k1", "--password", "12345678")
    assert res.exit_code == 0 and "ABCD 1234" in res.output


def test_backup_then_restore(data_dir, store, woman, now):
    res = run("backup", "--data", data_dir)
    assert res.exit_code == 0, res.output
    path = res.output.split("Backup written: ")[1].split()[0]
    store.amend(woman["id"], {"village": "Changed"}, by=USERNAME, reason="r", now=now)
    res = run("restore", path, "--data", data_dir, "--yes")
    assert res.exit_code == 0, res.output
    assert "verified" in res.output
    assert Store(data_dir).get(woman["id"])["village"] == "Upper Ridge"


def test_restore_of_an_altered_backup_fails_cleanly(data_dir, store, woman):
    path = store.backup()
    path.write_bytes(path.read_bytes()[:-10])
    res = run("restore", path, "--data", data_dir, "--yes")
    assert res.exit_code == 1 and "Error:" in res.output and "Traceback" not in res.output


def test_restore_asks_before_replacing(data_dir, store):
    path = store.backup()
    res = run("restore", path, "--data", data_dir, input="n\n")
    assert res.exit_code != 0
    assert [p for p in (data_dir / "backups").iterdir() if "prerestore" in p.name] == []


def test_check_reports_counts_and_passes(data_dir, store, pregnancy):
    res = run("check", "--data", data_dir)
    assert res.exit_code == 0, res.output
    assert f"{FACILITY_ID}: pregnancy 1, woman 1" in res.output and "OK" in res.output
    res = run("check", "--data", data_dir, "--json")
    assert json.loads(res.output)["counts"] == {FACILITY_ID: {"woman": 1, "pregnancy": 1}}


def test_check_fails_on_a_record_that_no_longer_validates(data_dir, store, woman):
    (part,) = (data_dir / "records" / FACILITY_ID).glob("*.json")
    text = part.read_text().replace('"stated_age"', '"x"')
    part.write_text(text.replace('"birth_date":"1994-05-02"', '"birth_date":"1994-13-02"'))
    res = run("check", "--data", data_dir)
    assert res.exit_code == 1
    assert "PROBLEM" in res.output and woman["id"] in res.output


def test_check_fails_on_a_file_that_does_not_parse(data_dir, store, woman):
    (part,) = (data_dir / "records" / FACILITY_ID).glob("*.json")
    part.write_bytes(b"{")
    res = run("check", "--data", data_dir)
    assert res.exit_code == 1 and str(part) in res.output and "rhledger restore" in res.output


def test_list_json_has_the_documented_keys(data_dir, store, woman, pregnancy, now):
    res = run("list", "--data", data_dir, "--json")
    (row,) = json.loads(res.output)
    assert row["rhd"] is None and row["name"] == "Amina Test Wanjiru" and row["status"] == "ongoing"
    assert {"pregnancy_id", "woman_id", "name", "facility", "rhd", "status"} <= set(row)
    store.create("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02"}, by=USERNAME,
                 facility=FACILITY_ID, pregnancy_id=pregnancy["id"], now=now)
    (row,) = json.loads(run("list", "--data", data_dir, "--json").output)
    assert row["rhd"] == "negative"
    res = run("list", "--data", data_dir)
    assert "Amina Test Wanjiru" in res.output and "negative" in res.output


def test_data_from_the_environment(data_dir, store, pregnancy, monkeypatch):
    monkeypatch.setenv("RHLEDGER_DATA", str(data_dir))
    res = run("list", "--json")
    assert len(json.loads(res.output)) == 1


def test_missing_config_is_a_clean_error(tmp_path):
    res = run("check", "--data", tmp_path / "none")
    assert res.exit_code == 1 and "rhledger init" in res.output


def test_console_script_runs(data_dir, store):
    out = subprocess.run([sys.executable, "-m", "clinic.cli.main", "check", "--data", str(data_dir)],
                         capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
