"""`rhledger serve` and `rhledger demo`: defaults, refusals with clear messages."""
from __future__ import annotations

import pytest
from click.testing import CliRunner

from clinic.cli.main import cli


@pytest.fixture
def served(monkeypatch):
    calls = {}
    import waitress

    monkeypatch.setattr(waitress, "serve", lambda app, **kw: calls.update(app=app, **kw))
    import clinic.web.lan as lan

    monkeypatch.setattr(lan, "serve_https", lambda app, host, port, data_dir, **kw:
                        calls.update(app=app, host=host, port=port, data_dir=data_dir, lan=True))
    return calls


def test_serve_binds_this_laptop_only_by_default(data_dir, served):
    r = CliRunner().invoke(cli, ["serve", "--data", str(data_dir)])
    assert r.exit_code == 0, r.output
    assert served["host"] == "127.0.0.1" and served["port"] == 5080
    assert "http://127.0.0.1:5080/" in r.output


def test_serve_host_port_threads_options(data_dir, served):
    r = CliRunner().invoke(cli, ["serve", "--data", str(data_dir), "--host", "0.0.0.0", "--port", "6000",
                                 "--threads", "3"])
    assert r.exit_code == 0, r.output
    assert (served["host"], served["port"], served["threads"]) == ("0.0.0.0", 6000, 3)


def test_serve_lan_uses_https_on_all_interfaces(data_dir, served):
    r = CliRunner().invoke(cli, ["serve", "--data", str(data_dir), "--lan"])
    assert r.exit_code == 0, r.output
    assert served["lan"] and served["host"] == "0.0.0.0" and served["port"] == 5080


def test_serve_without_config_says_how_to_start(tmp_path, served):
    r = CliRunner().invoke(cli, ["serve", "--data", str(tmp_path / "none")])
    assert r.exit_code == 1
    assert "does not exist: run `rhledger init" in r.output
    assert not served


@pytest.mark.slow
def test_demo_no_serve_writes_data_and_prints_sign_in(tmp_path, served):
    d = tmp_path / "demo"
    r = CliRunner().invoke(cli, ["demo", "--data", str(d), "--no-serve"])
    assert r.exit_code == 0, r.output
    assert (d / "config.toml").exists()
    assert "Open http://127.0.0.1:5080/" in r.output and "sign in as" in r.output
    assert not served


def test_demo_refuses_a_non_empty_data_dir_without_force(tmp_path, served):
    d = tmp_path / "busy"
    d.mkdir()
    (d / "notes.txt").write_text("keep me")
    r = CliRunner().invoke(cli, ["demo", "--data", str(d), "--no-serve"])
    assert r.exit_code == 1
    assert "is not empty" in r.output and "--force" in r.output
    assert (d / "notes.txt").read_text() == "keep me"


def test_demo_unknown_site_lists_the_sites(tmp_path):
    r = CliRunner().invoke(cli, ["demo", "--data", str(tmp_path / "x"), "--site", "mars", "--no-serve"])
    assert r.exit_code == 1
    assert "clinic-a" in r.output


@pytest.mark.slow
def test_demo_then_serve(tmp_path, served):
    r = CliRunner().invoke(cli, ["demo", "--data", str(tmp_path / "d"), "--port", "5999"])
    assert r.exit_code == 0, r.output
    assert served["port"] == 5999
