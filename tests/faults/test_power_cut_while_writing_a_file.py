"""Power cut in the middle of a backup, a bundle export, a report file or a card print: the
process dies (killed by the kernel the moment a file grows past a limit, so no clean-up runs)
with the file half written. Afterwards no half file sits under a name the app or a person
takes for a good one: backups listed all verify, bundles in exports/ all read, and the card and
report files are either the previous complete ones or absent."""
from __future__ import annotations

import signal
import subprocess
import sys
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pypdfium2 as pdfium
import pytest

from clinic.reports.bundle import read_bundle
from clinic.signing.keys import ensure_facility_key
from clinic.signing.trust import load_trust
from clinic.store import Store
from clinic.store.backup import list_backups, newest_backup, read_verified
from tests.load.harness import FACILITY, ROOT, child_env, make_data_dir

NOW = datetime(2026, 12, 1, 9, 0, tzinfo=timezone.utc)


@pytest.fixture
def clinic(tmp_path) -> Path:
    """A clinic with its key and a few women, each with a typing, screens and a dose."""
    d = make_data_dir(tmp_path / "data")
    ensure_facility_key(d, FACILITY)
    s = Store(d)
    for n in range(4):
        at = NOW - timedelta(days=40 - n)
        w = s.create("woman", {"name": f"Powercut Woman {n}", "stated_age": 30, "village": "Testvale"},
                     by="midwife", facility=FACILITY, now=at).record
        p = s.create("pregnancy", {"booked_on": (at - timedelta(days=1)).date().isoformat(),
                                   "lmp": (at - timedelta(days=150)).date().isoformat(), "status": "ongoing",
                                   "gravidity": 2, "parity": 1}, by="midwife", facility=FACILITY,
                     woman_id=w["id"], now=at).record
        kw = dict(by="midwife", facility=FACILITY, pregnancy_id=p["id"], now=at)
        s.create("typing", {"abo": "A", "rhd": "negative", "tested_on": at.date().isoformat()}, **kw)
        for k in range(3):
            s.create("screen", {"sampled_at": (at - timedelta(hours=k + 1)).strftime("%Y-%m-%dT%H:%M:%SZ"),
                                "result": "negative"}, **kw)
        s.create("dose", {"given_at": (at - timedelta(minutes=30)).strftime("%Y-%m-%dT%H:%M:%SZ"), "amount": 1500,
                          "unit": "IU", "route": "IM", "product": "Anti-D 1500", "lot": f"LOT-{n}",
                          "lot_expiry": "2028-01-31", "indication": "routine-antenatal", "given_by": "midwife"}, **kw)
    return d


def cut(d: Path, what: str, limit: int, out: Path | None = None) -> None:
    """Run ``what`` in a child that dies mid-write once any file would grow past ``limit`` bytes."""
    res = subprocess.run([sys.executable, "-m", "tests.faults.child", "cut", str(limit), what, str(d), str(out or "-")],
                         cwd=ROOT, env=child_env(), capture_output=True, text=True, timeout=120)
    assert "cutting" in res.stdout, res.stderr
    assert res.returncode == -signal.SIGXFSZ, f"the {what} was not cut midway: {res.returncode} {res.stderr[-2000:]}"


def run_ok(d: Path, what: str, out: Path | None = None) -> None:
    """The same work, whole, in this process."""
    from click.testing import CliRunner

    from clinic.cli.main import cli
    from clinic.reports.bundle import export_bundle

    store = Store(d)
    if what == "backup":
        store.backup(now=NOW)
    elif what == "export":
        export_bundle(store, d, facility=FACILITY, since="LAST", out=None)
    else:
        args = (["card", store.pregnancies()[0]["id"], "--out", str(out)] if what == "card" else
                ["report", "--month", "2026-11", "--format", "csv", "--out", str(out)])
        res = CliRunner().invoke(cli, [*args, "--data", str(d)])
        assert res.exit_code == 0, res.output


def complete_pdf(path: Path) -> bool:
    data = path.read_bytes()
    if not data.rstrip().endswith(b"%%EOF"):
        return False
    doc = pdfium.PdfDocument(data)
    try:
        return len(doc) >= 1
    finally:
        doc.close()


def test_backup_cut_midway_is_never_listed_as_a_backup(clinic):
    run_ok(clinic, "backup")
    good = newest_backup(clinic)
    size = good.stat().st_size
    for fraction in (0.3, 0.9):
        cut(clinic, "backup", int(size * fraction))
        assert list_backups(clinic) == [good], "a half-written backup is listed"
        for b in list_backups(clinic):
            read_verified(b)   # BackupInvalid if it were not whole
    Store(clinic)  # opening clears the killed backup's temp file
    assert not [p for p in (clinic / "backups").iterdir() if p.name.endswith(".tmp")]
    run_ok(clinic, "backup")
    assert len(list_backups(clinic)) == 2 and all(read_verified(b) for b in list_backups(clinic))


def test_export_cut_midway_leaves_no_bundle_and_exports_it_next_time(clinic):
    exports = clinic / "exports"
    cut(clinic, "export", 600)
    trust = load_trust(clinic)
    assert not list(exports.glob("*.rhlb")), "a half-written bundle carries a bundle's name"
    run_ok(clinic, "export")
    bundles = list(exports.glob("*.rhlb"))
    assert len(bundles) == 1
    b = read_bundle(bundles[0].read_bytes(), trust, name=bundles[0].name, now=NOW + timedelta(days=400))
    assert len(b.records) == len(list(Store(clinic).iter_records())), "the cut export marked records as sent"


@pytest.mark.parametrize("what, name", [("card", "card.pdf"), ("report", "report.csv")])
def test_card_print_or_report_cut_midway_keeps_the_previous_file(clinic, tmp_path, what, name):
    out = tmp_path / "out" / name
    run_ok(clinic, what, out)
    before = out.read_bytes()
    assert (complete_pdf(out) if what == "card" else before.endswith(b"\n"))
    cut(clinic, what, len(before) // 2, out)
    assert out.read_bytes() == before, f"the {name} under its own name is no longer the whole previous one"
    out.unlink()
    cut(clinic, what, len(before) // 2, out)
    assert not out.exists(), f"a half {name} was left under its own name"
