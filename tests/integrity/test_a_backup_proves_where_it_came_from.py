"""A backup proves where it came from: its manifest is signed with the facility key. A backup
whose files were changed and whose manifest and checksum were recomputed is refused; so is one
whose signature was removed (unless --unverified), and another facility's backup (unless
--from-facility names it). Every refusal says why and leaves the store as it was."""
from __future__ import annotations

import hashlib
import io
import shutil
import tarfile

import pytest
from click.testing import CliRunner

from clinic.cli.main import cli
from clinic.store import BackupInvalid, Store, StoreError
from tests.card.histories import full_history, put_in_store
from tests.card.world import make_world

CLINIC, HOSPITAL = "DEMO-CLINIC-NORTH", "DEMO-HOSPITAL"


def BackupSeal(d):  # noqa: N802 - the seal of clinic.signing, imported when first used
    from clinic.signing.seal import BackupSeal as seal

    return seal(d)


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    w = make_world(tmp_path_factory.mktemp("backups"))
    for name in ("clinic", "hospital"):
        d = w["dirs"][name]
        put_in_store(Store(d), full_history(), facility=CLINIC if name == "clinic" else HOSPITAL)
    return w


def _store(w, name):
    d = w["dirs"][name]
    return d, Store(d, seal=BackupSeal(d))


def _tree(d):
    return {p.relative_to(d).as_posix(): p.read_bytes() for sub in ("records", "audit")
            for p in sorted((d / sub).rglob("*")) if p.is_file() and not p.name.startswith(".")}


def _members(path):
    with tarfile.open(path) as tar:
        return {m.name: tar.extractfile(m).read() for m in tar.getmembers()}


def _write(path, members):
    """A backup archive with these members and a fresh .sha256 beside it (as a forger would)."""
    with tarfile.open(path, "w:gz") as tar:
        for name, data in members.items():
            ti = tarfile.TarInfo(name)
            ti.size = len(data)
            tar.addfile(ti, io.BytesIO(data))
    digest = hashlib.sha256(path.read_bytes()).hexdigest()
    path.with_name(path.name + ".sha256").write_text(f"{digest}  {path.name}\n")


def _recompute_manifest(members):
    lines = [f"{hashlib.sha256(v).hexdigest()}  {k}" for k, v in members.items()
             if k not in ("MANIFEST.sha256", "MANIFEST.cose")]
    members["MANIFEST.sha256"] = ("\n".join(lines) + "\n").encode()
    return members


def _restore(w, name, backup, **kw):
    d = w["dirs"][name]
    return Store.restore(d, backup, seal=BackupSeal(d), **kw)


def test_a_backup_is_signed_and_restores_here(world):
    d, s = _store(world, "clinic")
    path = s.backup()
    assert "MANIFEST.cose" in _members(path)
    res = _restore(world, "clinic", path)
    assert any(f"signed by {CLINIC}" in n for n in res["notes"])


def test_a_manifest_recomputed_after_a_change_is_refused(world, tmp_path):
    d, s = _store(world, "clinic")
    members = _members(s.backup())
    part = next(k for k in members if k.startswith(f"records/{CLINIC}/") and k.endswith(".json"))
    members[part] = members[part].replace(b"negative", b"positive", 1)
    forged = tmp_path / "rhledger-backup-20261120T120000000000Z.tar.gz"
    _write(forged, _recompute_manifest(members))
    before = _tree(d)
    with pytest.raises(BackupInvalid, match="not the one .* signed"):
        _restore(world, "clinic", forged)
    assert _tree(d) == before


def test_a_backup_stripped_of_its_signature_is_refused_unless_asked(world, tmp_path):
    d, s = _store(world, "clinic")
    members = _members(s.backup())
    del members["MANIFEST.cose"]
    bare = tmp_path / "rhledger-backup-20261120T120000000001Z.tar.gz"
    _write(bare, members)
    before = _tree(d)
    with pytest.raises(StoreError, match="not signed.*--unverified"):
        _restore(world, "clinic", bare)
    assert _tree(d) == before
    res = _restore(world, "clinic", bare, unverified=True)
    assert any("not signed" in n for n in res["notes"])


def test_a_backup_of_another_facility_is_refused_unless_named(world, tmp_path):
    _, hospital = _store(world, "hospital")
    theirs = hospital.backup()
    d = tmp_path / "clinic"
    shutil.copytree(world["dirs"]["clinic"], d)
    before = _tree(d)
    with pytest.raises(StoreError, match=f"another facility, {HOSPITAL}.*--from-facility {HOSPITAL}"):
        Store.restore(d, theirs, seal=BackupSeal(d))
    assert _tree(d) == before
    with pytest.raises(StoreError, match="not of SOMEWHERE-ELSE"):
        Store.restore(d, theirs, seal=BackupSeal(d), from_facility="SOMEWHERE-ELSE")
    res = Store.restore(d, theirs, seal=BackupSeal(d), from_facility=HOSPITAL)
    assert any(f"backup of {HOSPITAL}" in n for n in res["notes"])
    assert {r["facility"] for r in Store(d).iter_records()} == {HOSPITAL}


def test_the_restore_command_says_so_plainly(world):
    _, hospital = _store(world, "hospital")
    theirs = hospital.backup()
    clinic = world["dirs"]["clinic"]
    res = CliRunner().invoke(cli, ["restore", str(theirs), "--data", str(clinic), "--yes"])
    assert res.exit_code == 1
    assert f"backup of another facility, {HOSPITAL}" in res.output and "--from-facility" in res.output


def test_the_commands_refuse_a_forged_backup(world, tmp_path):
    clinic = world["dirs"]["clinic"]
    made = CliRunner().invoke(cli, ["backup", "--data", str(clinic)])
    assert made.exit_code == 0, made.output
    members = _members(made.output.split("Backup written: ")[1].splitlines()[0].strip())
    part = next(k for k in members if k.startswith(f"records/{CLINIC}/") and k.endswith(".json"))
    members[part] = members[part].replace(b"negative", b"positive", 1)
    forged = tmp_path / "rhledger-backup-20261120T120000000002Z.tar.gz"
    _write(forged, _recompute_manifest(members))
    before = _tree(clinic)
    res = CliRunner().invoke(cli, ["restore", str(forged), "--data", str(clinic), "--yes"])
    assert res.exit_code == 1 and "altered" in res.output
    assert _tree(clinic) == before


def test_the_backup_command_signs(world):
    clinic = world["dirs"]["clinic"]
    res = CliRunner().invoke(cli, ["backup", "--data", str(clinic)])
    assert res.exit_code == 0, res.output
    path = res.output.split("Backup written: ")[1].splitlines()[0].strip()
    assert "MANIFEST.cose" in _members(path)
