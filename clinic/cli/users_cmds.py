"""Staff accounts and the audit trail from the command line.

    rhledger users add NAME --role ROLE [--display-name TEXT] [--password-prompt]
    rhledger users list [--json]
    rhledger users disable|enable|reset|unlock NAME
    rhledger users role NAME ROLE
    rhledger audit [--by NAME] [--record ID] [--since DAY] [--until DAY] [--json]

The same operations as the admin pages, through clinic.accounts. Changes made here are
logged as made by "cli:<login name>". A one-time password is printed once.
"""
from __future__ import annotations

import getpass
import time

import click

from clinic.accounts.roles import PERMISSIONS, ROLE_LABELS, ROLE_PERMISSIONS, ROLES
from clinic.cli.common import clean_errors, data_option, emit_json, resolve_data


def _errors():
    from clinic.accounts.passwords import PasswordPolicyError
    from clinic.accounts.users import AccountError
    from clinic.config import ConfigError
    from clinic.store import StoreError
    from clinic.store.audit_query import AuditQueryError
    return (AccountError, PasswordPolicyError, ConfigError, StoreError, AuditQueryError, OSError)


def handled(fn):
    import functools

    @functools.wraps(fn)
    def wrapper(*a, **kw):
        return clean_errors(*_errors())(fn)(*a, **kw)
    return wrapper


def _who() -> str:
    try:
        return f"cli:{getpass.getuser()}"
    except (KeyError, OSError):
        return "cli"


def open_users(data):
    from clinic.accounts.users import LockPolicy, UserStore
    from clinic.config import load_settings

    d = resolve_data(data)
    s = load_settings(d)
    return UserStore(d, legacy=s.accounts, policy=LockPolicy(s.lock_after, s.lock_minutes))


def _print_otp(username: str, otp: str, what: str) -> None:
    click.echo(f"One-time password for {username} ({what}): {otp}")
    click.echo("Give it in person; it is not shown again. At the first sign-in they choose their own password.")


@click.group("users")
def users_group():
    """Staff accounts: add, list, disable, enable, reset, unlock, change role.

    Roles: midwife, nurse, clinician, lab, district-officer, admin (`rhledger users roles`).
    """


@users_group.command("add")
@click.argument("username")
@click.option("--role", type=click.Choice(ROLES), required=True, help="What the person may do.")
@click.option("--display-name", default=None, help="Name shown on pages and in the audit (default: the user name).")
@click.option("--password-prompt", is_flag=True, help="Type the password now instead of printing a one-time one.")
@data_option
@handled
def add_cmd(username, role, display_name, password_prompt, data):
    """Add an account; prints a one-time password to change at first sign-in."""
    store = open_users(data)
    password = None
    if password_prompt:
        password = click.prompt(f"Password for {username}", hide_input=True, confirmation_prompt=True)
    user, otp = store.add(username, role, display_name=display_name, password=password, by=_who(), now=time.time())
    click.echo(f"Added {user.username} ({ROLE_LABELS[user.role]}).")
    if otp:
        _print_otp(user.username, otp, "new account")


@users_group.command("list")
@click.option("--json", "as_json", is_flag=True, help="Print a JSON array.")
@data_option
@handled
def list_cmd(as_json, data):
    """Every account: role, state, last sign-in."""
    now = time.time()
    rows = [u.public(now) for u in open_users(data).all()]
    if as_json:
        emit_json(rows)
        return
    if not rows:
        click.echo("No accounts. Add one with `rhledger users add NAME --role admin`.")
    for r in rows:
        state = ("disabled" if r["disabled"] else f"locked until {r['locked_until']}" if r["locked_until"]
                 else "one-time password" if r["must_change"] else "active")
        click.echo(f"{r['username']:<20} {r['role']:<17} {state:<28} last sign-in {r['last_signin_at'] or '-'}"
                   f"{'  (demo)' if r['demo'] else ''}{'  (config.toml)' if r['source'] == 'config' else ''}")


def _simple(action: str, help_text: str):
    @users_group.command(action, help=help_text)
    @click.argument("username")
    @data_option
    @handled
    def cmd(username, data):
        store = open_users(data)
        if action == "reset":
            _print_otp(username, store.reset(username, by=_who(), now=time.time()), "password reset")
            return
        getattr(store, action)(username, by=_who(), now=time.time())
        click.echo({"disable": f"{username} is disabled (signed out everywhere).",
                    "enable": f"{username} may sign in again.", "unlock": f"{username} is unlocked."}[action])
    return cmd


_simple("disable", "Stop an account signing in (its sessions end). It stays in the audit trail.")
_simple("enable", "Let a disabled account sign in again.")
_simple("reset", "Give an account a new one-time password (printed once); unlocks it; its sessions end.")
_simple("unlock", "Lift the lock of an account after too many wrong passwords.")


@users_group.command("role")
@click.argument("username")
@click.argument("role", type=click.Choice(ROLES))
@data_option
@handled
def role_cmd(username, role, data):
    """Change the role of an account (its sessions end)."""
    open_users(data).set_role(username, role, by=_who(), now=time.time())
    click.echo(f"{username} now has the role {role}.")


@users_group.command("roles")
def roles_cmd():
    """What each role may do (the one table the app and this command use)."""
    for r in ROLES:
        click.echo(f"{r} ({ROLE_LABELS[r]}):")
        for p, words in PERMISSIONS.items():
            if p in ROLE_PERMISSIONS[r]:
                click.echo(f"  - {words}")


@click.command("audit")
@click.option("--by", default="", help="Only changes made by this user name.")
@click.option("--record", default="", help="Only changes of this record id.")
@click.option("--since", default="", help="From this local day (YYYY-MM-DD).")
@click.option("--until", default="", help="To this local day (YYYY-MM-DD), inclusive.")
@click.option("--limit", type=click.IntRange(1, 10000), default=500, show_default=True)
@click.option("--json", "as_json", is_flag=True, help="Print the lines as JSON.")
@data_option
@handled
def audit_cmd(by, record, since, until, limit, as_json, data):
    """The audit trail, newest first: who changed which record, when, and what changed."""
    from clinic.config import load_settings
    from clinic.store import Store
    from clinic.store.audit_query import AuditQuery, run

    d = resolve_data(data)
    settings = load_settings(d)
    q = AuditQuery.parse(by=by, record=record, since=since, until=until, limit=limit)
    lines, more = run(Store(d, settings), q, settings.tz)
    if as_json:
        emit_json(lines)
        return
    for e in lines:
        changed = ", ".join(sorted(e.get("changes") or {}))
        click.echo(f"{e.get('at')}  {e.get('by'):<18} {e.get('action'):<7} {e.get('kind'):<14} {e.get('id')}"
                   + (f"  [{changed}]" if changed else "") + (f"  reason: {e['reason']}" if e.get("reason") else ""))
    if more:
        click.echo(f"(only the newest {q.limit}; narrow with --by, --record, --since or --until)", err=True)
    if not lines:
        click.echo("No audit lines match.", err=True)


def register(cli: click.Group) -> None:
    cli.add_command(users_group)
    cli.add_command(audit_cmd)
