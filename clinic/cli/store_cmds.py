"""Store commands: init, backup, restore, check, list. Thin over clinic.store."""
from __future__ import annotations

import json
import tomllib
from datetime import date
from pathlib import Path

import click

from clinic.accounts.users import AccountError
from clinic.cli.common import clean_errors, data_option, emit_json, fail, open_store, resolve_data
from clinic.config import CONFIG_FILE, FACILITY_KINDS, ROLES, ConfigError, parse_settings
from clinic.records.validate import ValidationError
from clinic.signing.errors import SigningError
from clinic.store import Store, StoreError
from clinic.store.backup import sha256_file
from clinic.store.storage import atomic_write_bytes, ensure_dir

LIBRARY_ERRORS = (StoreError, ValidationError, ConfigError, SigningError, AccountError, OSError)


def _toml_str(s: str) -> str:
    # A JSON string (ASCII, escaped) is a valid TOML basic string.
    return json.dumps(str(s), ensure_ascii=True)


def config_text(*, facility_id: str, facility_name: str, kind: str, phone: str, district: str,
                timezone: str, profile: str, keep: int = 14) -> str:
    """The config.toml that `init` writes, with comments for the facility to review."""
    q = _toml_str
    return f"""\
# rhledger settings, written by `rhledger init` on {date.today().isoformat()}. Review every value.

[facility]
id = {q(facility_id)}
name = {q(facility_name)}
kind = {q(kind)}               # clinic, hospital or district
phone = {q(phone)}
district = {q(district)}
timezone = {q(timezone)}       # IANA time zone; times are stored in UTC and shown in this zone

[care]
profile = {q(profile)}         # protocol profile (see `rhledger --help` for the list)
# Share of the local population that is RhD negative (0-1): set it from local data.
rhd_negative_frequency = 0.15
# Default maternal blood volume for FMH dose calculation (mL).
maternal_blood_volume_ml = 5000

[stock]
# The anti-D products this facility stocks: edit to match the vials on the shelf.
products = [
  {{ name = "Anti-D immunoglobulin 1500 IU (300 ug)", vial_iu = 1500, routes = ["IM", "IV"] }},
  {{ name = "Anti-D immunoglobulin 1250 IU (250 ug)", vial_iu = 1250, routes = ["IM"] }},
]

[backup]
keep = {int(keep)}                      # how many daily backups to keep in <data>/backups

[security]
idle_minutes = 15              # a session ends after this long without use (a shared laptop)
lock_after = 5                 # wrong passwords in a row before an account locks
lock_minutes = 15              # how long it stays locked (an admin may unlock it sooner)

# Staff accounts are in users.json (0600): `rhledger users add NAME --role ROLE`.
"""


def _open(data: Path | None) -> Store:
    return open_store(resolve_data(data))


@click.command("init")
@data_option
@click.option("--facility-id", required=True, help="Short facility ID: 1-32 letters, digits, '-' or '_'.")
@click.option("--facility-name", default=None, help="Facility name as printed (default: the ID).")
@click.option("--kind", type=click.Choice(FACILITY_KINDS), default="clinic", show_default=True,
              help="What this installation is.")
@click.option("--phone", default="", help="Facility phone number, printed on cards.")
@click.option("--district", default="", help="District name.")
@click.option("--timezone", default="UTC", show_default=True, help="IANA time zone, e.g. Africa/Nairobi.")
@click.option("--profile", default="bsh-2014", show_default=True, help="Protocol profile.")
@click.option("--user", "username", default="admin", show_default=True, help="User name of the first account.")
@click.option("--role", type=click.Choice(ROLES), default="admin", show_default=True, help="Role of that account.")
@click.option("--password", default=None, help="Its password (prompted, hidden, when not given).")
@click.option("--one-time-password", "otp", is_flag=True,
              help="Print a one-time password instead (shown once; changed at the first sign-in).")
@clean_errors(*LIBRARY_ERRORS)
def init_cmd(data, facility_id, facility_name, kind, phone, district, timezone, profile, username, role,
             password, otp):
    """Create a data directory: config.toml, the first (admin) account, an empty store and the
    facility signing key.

    Refuses to touch a directory that already has a config.toml. The folder is made readable
    by its owner only (0700).
    """
    import os
    import time

    from clinic.accounts.passwords import PasswordPolicyError, check_policy
    from clinic.accounts.users import AccountError, UserStore, check_username
    from clinic.signing.keys import ensure_facility_key

    data_dir = resolve_data(data)
    cfg = data_dir / CONFIG_FILE
    if cfg.exists():
        fail(f"{cfg} already exists; init never overwrites a configuration. "
             f"Edit it, or choose another directory with --data DIR")
    try:
        username = check_username(username)
    except AccountError as e:
        fail(f"--user: {e}")
    if otp and password is not None:
        fail("--one-time-password and --password: give one of them")
    if password is None and not otp:
        password = click.prompt(f"Password for {username}", hide_input=True, confirmation_prompt=True)
    if password is not None:
        try:
            check_policy(password, "--password")
        except PasswordPolicyError as e:
            fail(str(e))
    text = config_text(facility_id=facility_id, facility_name=facility_name or facility_id, kind=kind,
                       phone=phone, district=district, timezone=timezone, profile=profile)
    settings = parse_settings(tomllib.loads(text), str(cfg))  # every value checked before anything is written
    ensure_dir(data_dir)
    os.chmod(data_dir, 0o700)
    key = ensure_facility_key(data_dir, settings.facility_id)
    _user, one_time = UserStore(data_dir).add(username, role, password=password, by="rhledger init",
                                              now=time.time())
    atomic_write_bytes(cfg, text.encode("utf-8"))
    open_store(data_dir, settings)
    click.echo(f"Created {data_dir} for {settings.facility_name} ({settings.facility_id}).")
    click.echo(f"Settings: {cfg} (review the [care] and [stock] values).")
    click.echo(f"Account {username} ({role}) in {data_dir / 'users.json'}.")
    if one_time:
        click.echo(f"One-time password for {username}: {one_time}")
        click.echo("It is shown only now; choose your own password at the first sign-in.")
    click.echo(f"Facility signing key fingerprint: {key.fingerprint}")
    click.echo("Give this fingerprint to the district office so they can trust this facility's cards.")


@click.command("backup")
@data_option
@clean_errors(*LIBRARY_ERRORS)
def backup_cmd(data):
    """Write a checksummed backup of the store into <data>/backups (keeps the newest N)."""
    store = _open(data)
    path = store.backup()
    click.echo(f"Backup written: {path}")
    click.echo(f"SHA-256: {sha256_file(path)}")


@click.command("restore")
@click.argument("backup_file", type=click.Path(dir_okay=False, path_type=Path))
@data_option
@click.option("--yes", is_flag=True, help="Do not ask for confirmation.")
@click.option("--from-facility", "from_facility", default=None, metavar="ID",
              help="Restore a backup of another facility (its ID), replacing this installation's records.")
@click.option("--unverified", is_flag=True,
              help="Restore a backup whose origin cannot be proven (not signed, or by a key not known here).")
@clean_errors(*LIBRARY_ERRORS)
def restore_cmd(backup_file, data, yes, from_facility, unverified):
    """Replace the store by BACKUP_FILE after verifying its checksums and its signature.

    A backup of another facility is refused unless --from-facility names it. A safety backup
    of the current files is made first. Stop the server before restoring.
    """
    from clinic.signing.seal import BackupSeal

    data_dir = resolve_data(data)
    if not yes:
        click.confirm(f"Replace the records in {data_dir} by {backup_file}?", abort=True)
    result = Store.restore(data_dir, backup_file, seal=BackupSeal(data_dir), from_facility=from_facility,
                           unverified=unverified)
    for note in result["notes"]:
        click.echo(f"Note: {note}")
    click.echo(f"Checksums verified; restored {backup_file} (made {result['info'].get('created_at', '?')}).")
    if result["safety_backup"]:
        click.echo(f"The files it replaced are kept in {result['safety_backup']}")
    open_store(data_dir)  # opens (and migrates) the restored store: proves it reads


@click.command("check")
@data_option
@click.option("--json", "as_json", is_flag=True, help="Print the report as JSON.")
@click.option("--repair", is_flag=True,
              help="First rebuild the index (records/index.log) from the partition files, which are the truth.")
@clean_errors(*LIBRARY_ERRORS)
def check_cmd(data, as_json, repair):
    """Verify the store: files parse, index consistent, records valid, parents exist, audit readable.

    Exits non-zero when it finds a problem. With --repair the index is rebuilt first (the old
    one is kept as records/.index.log.replaced).
    """
    store = _open(data)
    if repair:
        n = store.repair_index()
        if not as_json:
            click.echo(f"Index rebuilt from the partition files: {n} records listed.")
    rep = store.check()
    if as_json:
        emit_json({"ok": rep.ok, "partitions": rep.partitions, "audit_lines": rep.audit_lines,
                   "counts": rep.counts, "problems": rep.problems, "notes": rep.notes})
    else:
        total = sum(sum(k.values()) for k in rep.counts.values())
        click.echo(f"{store.data_dir}: {total} records in {rep.partitions} partition files, "
                   f"{rep.audit_lines} audit lines")
        for fac in sorted(rep.counts):
            kinds = ", ".join(f"{k} {n}" for k, n in sorted(rep.counts[fac].items()))
            click.echo(f"  {fac}: {kinds}")
        for n in rep.notes:
            click.echo(f"note: {n}")
        for p in rep.problems:
            click.echo(f"PROBLEM: {p}")
        click.echo("OK" if rep.ok else f"{len(rep.problems)} problem(s) found")
    if not rep.ok:
        raise SystemExit(1)


def latest_rhd(entries: list[dict]) -> str | None:
    """The RhD of the latest (not voided) typing of the woman, or None when untyped."""
    typings = [e for e in entries if e["kind"] == "typing" and not e.get("voided")]
    if not typings:
        return None
    return max(typings, key=lambda e: (e.get("tested_on", ""), e["created_at"]))["rhd"]


@click.command("list")
@data_option
@click.option("--facility", default=None, help="Only pregnancies of this facility ID.")
@click.option("--status", default=None, help="Only this status (ongoing, delivered, ...).")
@click.option("--json", "as_json", is_flag=True, help="Print a JSON array.")
@clean_errors(*LIBRARY_ERRORS)
def list_cmd(data, facility, status, as_json):
    """List pregnancies, one line each: booking, woman, RhD, status."""
    store = _open(data)
    rows = []
    for p in store.pregnancies(facility=facility, status=status):
        woman = store.get(p["woman_id"]) or {}
        rows.append({"pregnancy_id": p["id"], "woman_id": p["woman_id"], "name": woman.get("name"),
                     "register_no": woman.get("register_no"), "facility": p["facility"],
                     "booked_on": p.get("booked_on"), "edd": p.get("edd"),
                     "rhd": latest_rhd(store.entries(p["id"])), "status": p.get("status"),
                     "voided": bool(p.get("voided"))})
    if as_json:
        emit_json(rows)
        return
    if not rows:
        click.echo("No pregnancies.")
    for r in rows:
        click.echo(f"{r['booked_on']}  {r['facility']:<12} {r['name'] or '?':<28} "
                   f"RhD {r['rhd'] or 'untyped':<12} {r['status']:<18} {r['pregnancy_id']}"
                   + ("  [voided]" if r["voided"] else ""))


def register(cli: click.Group) -> None:
    for cmd in (init_cmd, backup_cmd, restore_cmd, check_cmd, list_cmd):
        cli.add_command(cmd)
