"""File modes of a data directory: the folder 0700, every secret file 0600.

Health records and signing keys sit on a laptop that other people may also sign in to, so the
data directory must be the owner's alone. ``check_modes`` lists what is looser than that, with
the command that fixes it; the server and the CLI print these warnings at start. Nothing is
changed behind the owner's back.
"""
from __future__ import annotations

import os
import stat
from pathlib import Path

# Files that hold secrets: private keys, the session key, password hashes.
SECRET_FILES = ("keys/facility-ed25519.pem", "secret_key", "users.json", "tls/ca.key", "tls/server.key")
SECRET_GLOBS = ("keys/retired/*.pem", "tls/*.key")
PRIVATE_DIRS = ("", "keys", "tls", "logs")


def _loose(path: Path, allowed: int) -> int | None:
    try:
        mode = stat.S_IMODE(path.stat().st_mode)
    except FileNotFoundError:
        return None
    return mode if mode & ~allowed else None


def check_modes(data_dir: Path) -> list[str]:
    """Warnings, one per folder or file whose mode lets other users of the laptop read it."""
    if os.name != "posix":
        return []
    data_dir = Path(data_dir)
    out = []
    for rel in PRIVATE_DIRS:
        d = data_dir / rel if rel else data_dir
        mode = _loose(d, 0o700)
        if mode is not None and d.is_dir():
            out.append(f"{d} is open to other users of this laptop (mode {mode:04o}); run: chmod 700 {d}")
    seen = set()
    files = [data_dir / rel for rel in SECRET_FILES]
    for pattern in SECRET_GLOBS:
        files += sorted(data_dir.glob(pattern))
    for f in files:
        if f in seen or not f.is_file():
            continue
        seen.add(f)
        mode = _loose(f, 0o600)
        if mode is not None:
            out.append(f"{f} holds a secret and is readable by others (mode {mode:04o}); run: chmod 600 {f}")
    return out
