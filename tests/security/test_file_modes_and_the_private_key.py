"""The data directory is 0700 and every secret file 0600, checked at start with a clear warning;
the facility's private key never appears in a bundle, a card, a backup or a log."""
from __future__ import annotations

import base64
import json
import tarfile
import zlib

from click.testing import CliRunner
from cryptography.hazmat.primitives import serialization

from clinic.cli.main import cli
from clinic.store.permissions import check_modes
from tests.security.world import Client, make_world


def test_init_makes_the_folder_and_its_secrets_the_owners_alone(tmp_path):
    d = tmp_path / "new"
    res = CliRunner().invoke(cli, ["init", "--data", str(d), "--facility-id", "m-1", "--password", "long enough"])
    assert res.exit_code == 0, res.output
    assert oct(d.stat().st_mode & 0o777) == "0o700"
    for f in ("users.json", "keys/facility-ed25519.pem"):
        assert oct((d / f).stat().st_mode & 0o777) == "0o600", f
    assert check_modes(d) == []


def test_loose_modes_are_named_with_the_command_that_fixes_them(tmp_path):
    world = make_world(tmp_path)
    d = world.data_dir
    assert check_modes(d) == []
    d.chmod(0o755)
    (d / "keys" / "facility-ed25519.pem").chmod(0o644)
    (d / "users.json").chmod(0o640)
    warnings = check_modes(d)
    assert len(warnings) == 3
    assert any(f"chmod 700 {d}" in w and "other users of this laptop" in w for w in warnings)
    assert any("facility-ed25519.pem holds a secret" in w and "chmod 600" in w for w in warnings)
    assert any("users.json" in w for w in warnings)


def test_serve_warns_at_start_and_the_admin_page_shows_it(tmp_path, monkeypatch):
    import waitress

    world = make_world(tmp_path)
    d = world.data_dir
    d.chmod(0o755)
    monkeypatch.setattr(waitress, "serve", lambda app, **kw: None)
    res = CliRunner().invoke(cli, ["serve", "--data", str(d)])
    assert res.exit_code == 0
    assert "Warning:" in res.output and f"chmod 700 {d}" in res.output
    from clinic.web import create_app

    app = create_app(d, test_config={"TESTING": True})
    html = Client(app, "admin").get("/admin/users").get_data(as_text=True)
    assert "File permissions:" in html and "chmod 700" in html


def _key_forms(d) -> list[bytes]:
    pem = (d / "keys" / "facility-ed25519.pem").read_bytes()
    key = serialization.load_pem_private_key(pem, password=None)
    raw = key.private_bytes(serialization.Encoding.Raw, serialization.PrivateFormat.Raw,
                            serialization.NoEncryption())
    der = key.private_bytes(serialization.Encoding.DER, serialization.PrivateFormat.PKCS8,
                            serialization.NoEncryption())
    body = b"".join(pem.splitlines()[1:-1])
    return [raw, der, body, base64.b64encode(raw), base64.urlsafe_b64encode(raw).rstrip(b"="), raw.hex().encode()]


def _contains_key(data: bytes, forms: list[bytes]) -> bool:
    blobs = [data]
    try:
        blobs.append(zlib.decompress(data))
    except zlib.error:
        pass
    return any(f in b for b in blobs for f in forms)


def test_the_private_key_is_in_no_bundle_card_backup_or_log(tmp_path, monkeypatch):
    from clinic.card.issue import issue_card
    from clinic.reports.bundle import export_bundle
    from clinic.web.db import get_settings

    world = make_world(tmp_path)
    d = world.data_dir
    forms = _key_forms(d)
    # bundle (its body is zlib-compressed: both are searched)
    b = export_bundle(world.store, d, facility="sec-clinic", since="LAST")
    data = b.path.read_bytes()
    assert not _contains_key(data, forms) and not any(_contains_key(data[i:], forms) for i in range(0, 64))
    # card: the QR text, and the PDF
    with world.app.app_context():
        ic = issue_card(d, world.store, get_settings(), world.pid)
    assert not _contains_key(ic.card.text.encode(), forms)
    pdf = Client(world.app, "midwife").get(f"/cards/pregnancy/{world.pid}/card.pdf").data
    assert not _contains_key(pdf, forms)
    # backup: no keys/ member, and no member holds the key
    archive = world.store.backup()
    with tarfile.open(archive) as tar:
        names = tar.getnames()
        assert not [n for n in names if "keys/" in n or n.endswith(".pem") or "secret_key" in n], names
        for m in tar.getmembers():
            if m.isfile():
                assert not _contains_key(tar.extractfile(m).read(), forms), m.name
    # logs: an error log after a failure, and the account log
    from clinic.web import create_app, worklist

    app = create_app(d)  # not TESTING: failures are answered, not raised

    def fail(*a, **kw):
        raise RuntimeError("an invented failure")

    monkeypatch.setattr(worklist, "build", fail)
    assert Client(app, "midwife").get("/").status_code == 500
    for log in (d / "logs" / "errors.log", d / "users-log.jsonl"):
        assert log.exists() and not _contains_key(log.read_bytes(), forms), log
        assert oct(log.stat().st_mode & 0o777) == "0o600", log
    assert json.loads((d / "logs" / "errors.log").read_text().splitlines()[-1])["reference"]


def test_a_backup_holds_no_secret_file(tmp_path):
    """Keys, the session key and the password hashes stay on this laptop; a backup restored on
    another machine gets new accounts (`rhledger users add`) and keeps its own key."""
    world = make_world(tmp_path)
    with tarfile.open(world.store.backup()) as tar:
        names = tar.getnames()
    assert not [n for n in names if n.split("/")[-1] in ("secret_key", "users.json") or "keys" in n.split("/")]
