"""Options and error handling shared by every command."""
from __future__ import annotations

import functools
import json
import sys
from pathlib import Path

import click

from clinic.config import data_dir_from


def data_option(fn):
    """--data DIR on every command (default $RHLEDGER_DATA, then ./instance)."""
    return click.option(
        "--data", "data", type=click.Path(file_okay=False, path_type=Path), default=None,
        help="Data directory (default: $RHLEDGER_DATA, else ./instance).",
    )(fn)


def resolve_data(data: Path | None) -> Path:
    return data_dir_from(data)


def open_store(data_dir: Path, settings=None):
    """The store of ``data_dir``, its backups signed with the facility key."""
    from clinic.signing.seal import BackupSeal
    from clinic.store import Store

    return Store(data_dir, settings, seal=BackupSeal(data_dir))


def emit_json(obj) -> None:
    click.echo(json.dumps(obj, indent=2, ensure_ascii=False, default=str))


def write_file(path: Path, data: bytes) -> None:
    """Write an output file (card, report, trust list) so that a power cut or a full disk midway
    leaves the old file or none, never half of one under the name asked for."""
    from clinic.signing.files import atomic_write

    atomic_write(Path(path), data, 0o644)


def fail(message: str, code: int = 1) -> None:
    """Print a clean error and exit non-zero."""
    click.echo(f"Error: {message}", err=True)
    sys.exit(code)


def clean_errors(*exc_types):
    """Turn library exceptions into a one-line message and a non-zero exit."""
    def deco(fn):
        @functools.wraps(fn)
        def wrapper(*a, **kw):
            try:
                return fn(*a, **kw)
            except exc_types as e:  # noqa: BLE001 - the listed library errors only
                errors = getattr(e, "errors", None)
                if errors:
                    lines = "\n".join(f"  {k}: {v}" for k, v in errors.items())
                    fail(f"{type(e).__name__}:\n{lines}")
                fail(str(e))
        return wrapper
    return deco
