"""Backups: a gzipped tar of the store files with a SHA-256 manifest inside and a checksum beside.

``<data>/backups/rhledger-<label>-<UTC stamp>.tar.gz`` holds ``records/``, ``audit/``,
``config.toml``, ``BACKUP.json`` (when, which facility, schema version),
``MANIFEST.sha256`` (``sha256sum`` format, one line per file) and ``MANIFEST.cose``: the
facility key's COSE_Sign1 signature over {facility, created_at, SHA-256 of the manifest}.
``<archive>.sha256`` beside it is the checksum of the whole archive. Restore verifies all
three before it replaces anything.

Checksums find damage; only the signature proves where a backup came from: anyone can
recompute a manifest after changing a file, nobody else can sign it. Signing and checking are
the facility key's (``clinic.signing``, a peer of the store): the store is handed a ``Seal``
(``clinic.signing.seal.BackupSeal``) by whoever opens it, and without one writes unsigned
backups and restores without checking where one came from (``origin_notes``).
"""
from __future__ import annotations

import hashlib
import io
import json
import os
import shutil
import tarfile
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta, timezone
from pathlib import Path, PurePosixPath
from typing import Protocol

from clinic.store.errors import BackupInvalid, BackupRefused
from clinic.store.storage import atomic_write_bytes, ensure_dir, fsync_dir

BACKUP_DIR = "backups"
STORE_DIRS = ("records", "audit")
EXTRA_FILES = ("config.toml",)
MANIFEST = "MANIFEST.sha256"
SIGNATURE = "MANIFEST.cose"
INFO = "BACKUP.json"
PREFIX = "rhledger-"
SUFFIX = ".tar.gz"


class Seal(Protocol):
    """Signing and checking a backup with the facility key (``clinic.signing.seal.BackupSeal``)."""

    def has_key(self) -> bool:
        """Whether this installation has a facility key (so its backups are signed)."""
        ...

    def sign(self, payload: bytes) -> bytes | None:
        """A COSE_Sign1 message over ``payload``; None when there is no facility key."""
        ...

    def check(self, message: bytes, on_date: date | None) -> tuple[str, str | None, bytes, str]:
        """(state, facility, payload, reason): state ``trusted`` (this facility's key, current or
        retired, or a key of the trust list, valid on ``on_date``), ``unknown-issuer`` or ``altered``."""
        ...


def sha256_bytes(b: bytes) -> str:
    return hashlib.sha256(b).hexdigest()


def sha256_file(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def store_files(data_dir: Path) -> list[Path]:
    """The files a backup holds, relative to the data directory (temp files left out)."""
    data_dir = Path(data_dir)
    out = []
    for d in STORE_DIRS:
        root = data_dir / d
        if root.is_dir():
            for p in sorted(root.rglob("*")):
                if p.is_file() and not any(part.startswith(".") for part in p.relative_to(data_dir).parts):
                    out.append(p.relative_to(data_dir))
    for name in EXTRA_FILES:
        if (data_dir / name).is_file():
            out.append(Path(name))
    return out


def list_backups(data_dir: Path) -> list[Path]:
    """Backups in <data>/backups, oldest first (the name carries the UTC time)."""
    root = Path(data_dir) / BACKUP_DIR
    if not root.is_dir():
        return []
    found = [p for p in root.iterdir() if p.name.startswith(PREFIX) and p.name.endswith(SUFFIX)]
    return sorted(found, key=lambda p: (_stamp(p), p.name))


def _stamp(p: Path) -> str:
    return p.name[: -len(SUFFIX)].rsplit("-", 1)[-1]


def backup_time(p: Path) -> datetime | None:
    try:
        return datetime.strptime(_stamp(p), "%Y%m%dT%H%M%S%fZ").replace(tzinfo=timezone.utc)
    except ValueError:
        return None


def newest_backup(data_dir: Path) -> Path | None:
    found = list_backups(data_dir)
    return found[-1] if found else None


def _seal_payload(facility: str, created_at: str, manifest: bytes) -> bytes:
    return json.dumps({"format": 1, "facility": facility, "created_at": created_at,
                       "manifest_sha256": sha256_bytes(manifest)}, sort_keys=True).encode()


def make_backup(data_dir: Path, *, label: str = "backup", keep: int | None = None,
                now: datetime | None = None, facility: str = "", schema: int | None = None,
                seal: Seal | None = None) -> Path:
    """Write one backup; call with the store lock held. Prunes to the newest ``keep`` of ``label``.
    Signed with ``seal`` (the facility key) when given and this installation has a key."""
    data_dir = Path(data_dir)
    now = now or datetime.now(timezone.utc)
    root = data_dir / BACKUP_DIR
    ensure_dir(root)
    at = now.astimezone(timezone.utc)
    while True:
        # Two backups in the same microsecond (a pinned clock in tests): step the name on.
        final = root / f"{PREFIX}{label}-{at.strftime('%Y%m%dT%H%M%S%fZ')}{SUFFIX}"
        if not final.exists():
            break
        at += timedelta(microseconds=1)
    tmp = root / f".{final.name}.{os.getpid()}.tmp"
    manifest = []
    try:
        # 0600: a backup holds names and the account password hashes.
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
        with os.fdopen(fd, "wb") as raw, tarfile.open(fileobj=raw, mode="w:gz") as tar:
            created_at = now.astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
            info = json.dumps({"format": 1, "created_at": created_at,
                               "facility": facility, "schema": schema, "label": label}, indent=1).encode()
            _add(tar, INFO, info, now)
            manifest.append(f"{sha256_bytes(info)}  {INFO}")
            for rel in store_files(data_dir):
                content = (data_dir / rel).read_bytes()
                name = PurePosixPath(*rel.parts).as_posix()
                _add(tar, name, content, now)
                manifest.append(f"{sha256_bytes(content)}  {name}")
            manifest_bytes = ("\n".join(manifest) + "\n").encode()
            _add(tar, MANIFEST, manifest_bytes, now)
            signed = seal.sign(_seal_payload(facility, created_at, manifest_bytes)) if seal is not None else None
            if signed is not None:
                _add(tar, SIGNATURE, signed, now)
            tar.close()
            raw.flush()
            os.fsync(raw.fileno())
        digest = sha256_file(tmp)
        atomic_write_bytes(final.with_name(final.name + ".sha256"), f"{digest}  {final.name}\n".encode())
        os.replace(tmp, final)
        fsync_dir(root)
    finally:
        tmp.unlink(missing_ok=True)
    if keep is not None:
        prune(data_dir, keep, label)
    return final


def _add(tar: tarfile.TarFile, name: str, content: bytes, now: datetime) -> None:
    ti = tarfile.TarInfo(name)
    ti.size = len(content)
    ti.mtime = int(now.timestamp())
    ti.mode = 0o600
    tar.addfile(ti, io.BytesIO(content))


def prune(data_dir: Path, keep: int, label: str = "backup") -> list[Path]:
    """Delete all but the newest ``keep`` backups of one label; returns what was removed."""
    mine = [p for p in list_backups(data_dir) if p.name.startswith(f"{PREFIX}{label}-")]
    removed = mine[:-keep] if keep > 0 else mine
    for p in removed:
        p.unlink(missing_ok=True)
        p.with_name(p.name + ".sha256").unlink(missing_ok=True)
    if removed:
        fsync_dir(Path(data_dir) / BACKUP_DIR)
    return removed


@dataclass
class Archive:
    """A backup read and checked against its checksums: the store files by relative name,
    BACKUP.json, the manifest and its signature (None when unsigned), and notes."""

    files: dict[str, bytes]
    info: dict
    manifest: bytes
    signature: bytes | None
    notes: list[str] = field(default_factory=list)


def read_verified(backup_file: Path) -> tuple[dict[str, bytes], dict, list[str]]:
    """Every file of a backup, after checking the archive checksum and each file's SHA-256.

    Returns (files by relative name, BACKUP.json, notes). Raises BackupInvalid naming what
    does not match; nothing is written anywhere. Where it came from is ``origin_notes``'s.
    """
    a = read_archive(backup_file)
    return a.files, a.info, a.notes


def read_archive(backup_file: Path) -> Archive:
    """``read_verified`` keeping the manifest and its signature."""
    backup_file = Path(backup_file)
    notes: list[str] = []
    if not backup_file.is_file():
        raise BackupInvalid(f"{backup_file} does not exist")
    side = backup_file.with_name(backup_file.name + ".sha256")
    if side.is_file():
        try:
            expected = side.read_text(encoding="ascii").split()[0].lower()
        except (UnicodeDecodeError, IndexError):
            raise BackupInvalid(f"{side} is not a SHA-256 checksum file") from None
        actual = sha256_file(backup_file)
        if actual != expected:
            raise BackupInvalid(f"{backup_file} has been altered or damaged: its SHA-256 is {actual}, "
                                f"but {side.name} says {expected}; nothing was restored")
    else:
        notes.append(f"no {side.name} beside the archive: checked the manifest inside only")
    files: dict[str, bytes] = {}
    try:
        with tarfile.open(backup_file, mode="r:gz") as tar:
            for m in tar:
                name = m.name
                p = PurePosixPath(name)
                if (not m.isfile() or p.is_absolute() or ".." in p.parts
                        or (p.parts[0] not in STORE_DIRS and name not in EXTRA_FILES + (MANIFEST, INFO, SIGNATURE))):
                    raise BackupInvalid(f"{backup_file} holds an unexpected entry {name!r}; not a rhledger backup")
                fh = tar.extractfile(m)
                files[name] = fh.read() if fh is not None else b""
    except (tarfile.TarError, OSError, EOFError) as e:
        raise BackupInvalid(f"{backup_file} cannot be read as a backup archive ({e}); nothing was restored") from None
    if MANIFEST not in files or INFO not in files:
        raise BackupInvalid(f"{backup_file} has no {MANIFEST} or {INFO}: not a rhledger backup")
    signature = files.pop(SIGNATURE, None)
    manifest = files.pop(MANIFEST)
    listed: dict[str, str] = {}
    for line in manifest.decode("utf-8", errors="replace").splitlines():
        if not line.strip():
            continue
        digest, _, name = line.partition("  ")
        listed[name] = digest
    if set(listed) != set(files):
        missing = sorted(set(listed) - set(files))
        extra = sorted(set(files) - set(listed))
        raise BackupInvalid(f"{backup_file} does not match its manifest (missing {missing}, unlisted {extra}); "
                            f"nothing was restored")
    for name, content in files.items():
        if sha256_bytes(content) != listed[name]:
            raise BackupInvalid(f"{backup_file}: {name} does not match its SHA-256 in {MANIFEST} "
                                f"(altered or damaged); nothing was restored")
    try:
        info = json.loads(files.pop(INFO))
    except ValueError:
        raise BackupInvalid(f"{backup_file}: {INFO} does not parse") from None
    if not isinstance(info, dict):
        raise BackupInvalid(f"{backup_file}: {INFO} is not an object")
    return Archive(files, info, manifest, signature, notes)


def origin_notes(a: Archive, name: str, *, seal: Seal | None, here: str | None,
                 from_facility: str | None = None, unverified: bool = False) -> list[str]:
    """Where a backup came from, proven by its signature; raises before anything is restored.

    ``here``: this installation's facility (None when it has no settings yet). A backup signed
    by a key that no longer matches its manifest is refused (BackupInvalid). Refused unless the
    caller says so (BackupRefused, naming the option): a backup of another facility
    (``from_facility`` = its ID), and, on an installation with a facility key, one that is not
    signed or signed by a key it does not know (``unverified``). Returns notes to show.
    """
    notes: list[str] = []
    claimed = a.info.get("facility") or None
    origin = claimed
    if a.signature is None:
        if seal is not None and seal.has_key() and not unverified:
            raise BackupRefused(
                f"{name} is not signed, so nothing proves where it came from (it was made by an older "
                f"rhledger, or its signature was removed). Nothing was restored. If you made it yourself "
                f"and trust it, restore it with --unverified")
        notes.append("this backup is not signed: where it came from cannot be proven")
    elif seal is None:
        notes.append("the backup's signature was not checked")
    else:
        day = _created_day(a.info.get("created_at"))
        state, signer, payload, reason = seal.check(a.signature, day)
        if state == "altered":
            raise BackupInvalid(f"{name} has been altered: its signature does not match ({reason}); "
                                f"nothing was restored")
        if state != "trusted":
            if not unverified:
                raise BackupRefused(
                    f"{name} is signed by a key this installation does not know ({reason}). Nothing was "
                    f"restored. Import the district's newest trust list and try again, or, if you are sure "
                    f"where it came from, restore it with --unverified")
            notes.append(f"the backup's signer is not known here ({reason}); restored as asked (--unverified)")
        else:
            try:
                sealed = json.loads(payload)
            except ValueError:
                sealed = {}
            if not isinstance(sealed, dict) or sealed.get("manifest_sha256") != sha256_bytes(a.manifest):
                raise BackupInvalid(f"{name} has been altered: its manifest is not the one {signer} signed "
                                    f"(recomputed after a change); nothing was restored")
            if sealed.get("facility") != signer or (claimed and claimed != signer):
                raise BackupInvalid(f"{name} says it is a backup of {claimed!r} but is signed by the key of "
                                    f"{signer!r}; nothing was restored")
            origin = signer
            notes.append(f"signed by {signer}'s facility key: {reason}")
    if from_facility and from_facility != origin:
        raise BackupRefused(f"{name} is a backup of {origin or 'an unnamed facility'}, not of {from_facility} "
                            f"(--from-facility); nothing was restored")
    if origin and here and origin != here and from_facility != origin:
        raise BackupRefused(
            f"{name} is a backup of another facility, {origin}, not of this installation ({here}): restoring "
            f"it would replace {here}'s records by {origin}'s. Nothing was restored. If that is what you mean, "
            f"restore it with --from-facility {origin}")
    if origin and here and origin != here:
        notes.append(f"restored a backup of {origin} into the installation of {here}, as asked (--from-facility)")
    return notes


def _created_day(text) -> date | None:
    try:
        return datetime.fromisoformat(str(text).replace("Z", "+00:00")).date()
    except ValueError:
        return None


def install(data_dir: Path, files: dict[str, bytes]) -> None:
    """Replace records/ and audit/ by the backup's (store lock held; files already verified).

    The new tree is written beside the old one and swapped in by renames; config.toml is
    written only when the data directory has none.
    """
    data_dir = Path(data_dir)
    stage = data_dir / f".restore-{os.getpid()}"
    if stage.exists():
        shutil.rmtree(stage)
    try:
        for name, content in files.items():
            if name in EXTRA_FILES:
                continue
            target = stage / name
            ensure_dir(target.parent)
            with open(target, "wb") as fh:
                fh.write(content)
                fh.flush()
                os.fsync(fh.fileno())
        for d in STORE_DIRS:
            ensure_dir(stage / d)
            for sub in [p for p in (stage / d).rglob("*") if p.is_dir()] + [stage / d]:
                fsync_dir(sub)
        old = data_dir / f".replaced-{os.getpid()}"
        if old.exists():
            shutil.rmtree(old)
        old.mkdir()
        for d in STORE_DIRS:
            if (data_dir / d).exists():
                os.replace(data_dir / d, old / d)
            os.replace(stage / d, data_dir / d)
        fsync_dir(data_dir)
        shutil.rmtree(old)
        for name in EXTRA_FILES:
            if name in files and not (data_dir / name).exists():
                atomic_write_bytes(data_dir / name, files[name])
    finally:
        if stage.exists():
            shutil.rmtree(stage)
