"""Demo accounts exist only in demo data directories (the DEMO marker), and the demo says so on
the sign-in page, with its published sign-ins."""
from __future__ import annotations

import shutil

import pytest

from tests.security.world import Client


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    from seed_demo.scenario import build_site

    d = tmp_path_factory.mktemp("demo") / "data"
    build_site(d, "clinic-a")
    return d


def test_the_demo_sign_in_page_says_it_is_a_demo_and_lists_the_sign_ins(demo_dir):
    from clinic.web import create_app

    app = create_app(demo_dir, test_config={"TESTING": True})
    html = app.test_client().get("/signin").get_data(as_text=True)
    assert "Demo installation." in html and "invented people and places" in html
    assert "<code>midwife</code> / <code>midwife-demo</code>" in html
    assert Client(app, "midwife", password="midwife-demo").get("/api/v1/session").status_code == 200


def test_demo_accounts_do_not_sign_in_outside_a_demo_directory(demo_dir, tmp_path):
    from clinic.web import create_app

    copy = tmp_path / "copied"
    shutil.copytree(demo_dir, copy)
    (copy / "DEMO").unlink()           # e.g. users.json carried into a real installation
    app = create_app(copy, test_config={"TESTING": True})
    c = Client(app)
    r = c.open("POST", "/signin", form={"username": "midwife", "password": "midwife-demo"})
    assert r.status_code == 403 and "demo account" in r.get_data(as_text=True)
    assert "Demo installation" not in app.test_client().get("/signin").get_data(as_text=True)


def test_a_real_installation_has_no_demo_marker_and_no_demo_accounts(tmp_path):
    from click.testing import CliRunner

    from clinic.accounts.users import UserStore, is_demo_dir
    from clinic.cli.main import cli

    d = tmp_path / "real"
    res = CliRunner().invoke(cli, ["init", "--data", str(d), "--facility-id", "real-1", "--password", "long enough"])
    assert res.exit_code == 0, res.output
    assert not is_demo_dir(d)
    assert not any(u.demo for u in UserStore(d).all())
