"""The command line: a card printed at the demo clinic is read at the demo hospital by text
and by image, with the right trust state and exit status, and imported without duplicates."""
from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

from clinic.cli.main import cli
from clinic.store import Store
from tests.card.histories import full_history, put_in_store
from tests.card.world import make_world, run


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    root = tmp_path_factory.mktemp("cli")
    w = make_world(root)
    history = full_history()
    put_in_store(Store(w["dirs"]["clinic"]), history)
    w["pid"] = history[1]["id"]
    w["root"] = root
    res = run("card", w["pid"][:8], "--out", root / "card.pdf", "--png", root / "card.png", "--payload",
              "--data", w["dirs"]["clinic"])
    w["text"] = res.stdout.splitlines()[0]
    return w


def invoke(*args):
    return CliRunner().invoke(cli, [str(a) for a in args], catch_exceptions=False)


def test_card_writes_pdf_png_and_prints_the_payload(world):
    assert world["text"].startswith("RHL1:")
    assert (world["root"] / "card.pdf").read_bytes()[:4] == b"%PDF"
    assert (world["root"] / "card.png").read_bytes()[:4] == b"\x89PNG"


def test_read_card_text_json_is_trusted_with_history(world):
    res = invoke("read-card", "--text", world["text"] + "\n", "--json", "--data", world["dirs"]["hospital"])
    assert res.exit_code == 0
    out = json.loads(res.stdout)
    assert out["trust"] == "trusted" and out["issuer"]["facility_id"] == "DEMO-CLINIC-NORTH"
    assert out["history"]["pregnancy"]["id"] == world["pid"] and len(out["history"]["entries"]) == 13


def test_read_card_image_and_import_without_duplicates(world):
    d = world["dirs"]["hospital"]
    res = invoke("read-card", "--image", world["root"] / "card.png", "--import", "--json", "--data", d)
    assert res.exit_code == 0, res.output
    assert json.loads(res.stdout)["import"]["counts"] == {"created": 15}
    res = invoke("read-card", "--text", world["text"], "--import", "--json", "--data", d)
    assert json.loads(res.stdout)["import"]["counts"] == {"unchanged": 15}
    assert len(Store(d).pregnancies()) == 1


def test_altered_and_unreadable_exit_non_zero(world):
    t = world["text"]
    i = len(t) // 2
    altered = t[:i] + ("0" if t[i] != "0" else "1") + t[i + 1:]
    res = invoke("read-card", "--text", altered, "--json", "--data", world["dirs"]["hospital"])
    assert json.loads(res.stdout)["trust"] in ("altered", "unreadable") and res.exit_code in (2, 3)
    res = invoke("read-card", "--text", "NOT A CARD", "--json", "--data", world["dirs"]["hospital"])
    assert json.loads(res.stdout)["trust"] == "unreadable" and res.exit_code == 3


def test_unknown_issuer_at_an_installation_without_the_trust_list(world, tmp_path):
    from tests.card.world import init
    lonely = init(tmp_path, "lonely", "DEMO-LONELY-POST", "Lonely Demo Post", "clinic", "+000 555 0300")
    res = invoke("read-card", "--text", world["text"], "--json", "--data", lonely)
    out = json.loads(res.stdout)
    assert res.exit_code == 0 and out["trust"] == "unknown-issuer" and "unsigned paper record" in out["advice"]
    res = invoke("read-card", "--text", world["text"], "--import", "--data", lonely)
    assert res.exit_code != 0 and "trust list" in res.output


def test_card_code_lookup_at_the_issuer(world):
    res = invoke("card", world["pid"], "--json", "--data", world["dirs"]["clinic"])
    code = json.loads(res.stdout)["card_code"]
    res = invoke("card-code", code.lower(), "--data", world["dirs"]["clinic"])
    assert res.exit_code == 0 and json.loads(res.stdout)["pregnancy_id"] == world["pid"]


def test_keys_show_never_prints_the_private_key(world):
    d = world["dirs"]["clinic"]
    pem = (d / "keys" / "facility-ed25519.pem").read_text()
    body = "".join(pem.splitlines()[1:-1])
    for args in (("keys", "show"), ("keys", "show", "--json"), ("trust", "list"), ("trust", "list", "--json")):
        assert body not in invoke(*args, "--data", d).output


def test_trust_import_without_fingerprint_explains(world, tmp_path):
    from tests.card.world import init
    fresh = init(tmp_path, "fresh", "DEMO-FRESH", "Fresh Demo Clinic", "clinic", "+000 555 0400")
    res = invoke("trust", "import", world["trust_file"], "--data", fresh)
    assert res.exit_code != 0 and world["fingerprint"] in res.output and "--fingerprint" in res.output


def test_card_needs_an_output_and_a_known_pregnancy(world):
    d = world["dirs"]["clinic"]
    assert "say what to make" in invoke("card", world["pid"], "--data", d).output
    assert "no pregnancy" in invoke("card", "ffffffff", "--payload", "--data", d).output


@pytest.mark.parametrize("args", [["card"], ["read-card"], ["card-code"], ["keys"], ["keys", "show"],
                                  ["keys", "rotate"], ["trust"], ["trust", "build"], ["trust", "import"],
                                  ["trust", "list"], ["trust", "show"]])
def test_every_card_command_has_help(args):
    res = invoke(*args, "--help")
    assert res.exit_code == 0 and len(res.output.split("\n\n")[1].strip()) > 20
