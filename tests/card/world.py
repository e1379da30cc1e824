"""A small invented district for the card tests: a district office, a clinic and a hospital,
each a data directory made by `rhledger init`, with a trust list built and imported."""
from __future__ import annotations

import json
from pathlib import Path

from click.testing import CliRunner

from clinic.cli.main import cli

PASSWORD = "demo-pass-1234"


def run(*args, input=None, expect=0):
    res = CliRunner().invoke(cli, [str(a) for a in args], input=input, catch_exceptions=False)
    assert res.exit_code == expect, (args, res.exit_code, res.output, res.stderr if hasattr(res, "stderr") else "")
    return res


def init(root: Path, name: str, facility_id: str, title: str, kind: str, phone: str) -> Path:
    d = root / name
    run("init", "--data", d, "--facility-id", facility_id, "--facility-name", title, "--kind", kind,
        "--phone", phone, "--timezone", "Africa/Nairobi", "--user", "demo", "--role", "midwife",
        "--password", PASSWORD)
    return d


def make_world(root: Path) -> dict:
    dirs = {
        "district": init(root, "district", "DEMO-DISTRICT", "Demo District Office", "district", "+000 555 0001"),
        "clinic": init(root, "clinic", "DEMO-CLINIC-NORTH", "North Demo Clinic", "clinic", "+000 555 0100"),
        "hospital": init(root, "hospital", "DEMO-HOSPITAL", "Demo District Hospital", "hospital", "+000 555 0200"),
    }
    entries = [json.loads(run("keys", "show", "--json", "--data", dirs[n]).output) for n in ("clinic", "hospital")]
    facilities = root / "facilities.json"
    facilities.write_text(json.dumps(entries))
    out = root / "trust.cose"
    built = run("trust", "build", "--facilities", facilities, "--out", out, "--seq", "1", "--data", dirs["district"])
    fingerprint = built.output.strip().splitlines()[-1].split(": ")[-1]
    for n in ("clinic", "hospital"):
        run("trust", "import", out, "--fingerprint", fingerprint, "--data", dirs[n])
    return {"dirs": dirs, "trust_file": out, "fingerprint": fingerprint}
