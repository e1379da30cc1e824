"""Staff accounts in ``<data>/users.json``: who may sign in, with which role, and the lock-out.

The file is written whole (temp file, fsync, rename, fsync of the folder; mode 0600) under its
own file lock (``<data>/.users.lock``), so the server and ``rhledger users`` may change it at the same time.
Every change to an account is also appended to ``<data>/users-log.jsonl`` naming who made it.

Accounts written by earlier versions into config.toml (``[[accounts]]``, werkzeug hashes) are
still read: such an account moves into users.json the first time it changes (its hash is
re-made as Argon2id at its next sign-in). An account in users.json wins over one of the same
name in config.toml.

Demo accounts (``"demo": true``, written by seed_demo) sign in only in a data directory that
holds the ``DEMO`` marker file, so published demo passwords never open a real installation.
"""
from __future__ import annotations

import json
import os
import re
import threading
from dataclasses import asdict, dataclass, field, replace
from datetime import datetime, timezone
from pathlib import Path
from typing import Iterable

from filelock import FileLock

from clinic.accounts import passwords
from clinic.accounts.roles import ROLE_LABELS, check_role

USERS_FILE = "users.json"
USERS_LOCK = ".users.lock"
USERS_LOG = "users-log.jsonl"
DEMO_MARKER = "DEMO"
FORMAT = "rhledger-users"
VERSION = 1
USERNAME_RE = re.compile(r"^[a-z0-9][a-z0-9._-]{0,39}$")


class AccountError(ValueError):
    """An account operation that cannot be done (unknown user, bad name, last admin ...)."""


@dataclass(frozen=True)
class LockPolicy:
    """Lock an account after ``after`` wrong passwords in a row, for ``minutes``."""

    after: int = 5
    minutes: int = 15


@dataclass(frozen=True)
class User:
    username: str
    display_name: str
    role: str
    password_hash: str
    disabled: bool = False
    must_change: bool = False      # signed in with a one-time password: choose a new one first
    failed: int = 0                # wrong passwords in a row
    locked_until: float | None = None  # epoch seconds
    epoch: int = 1                 # raised by a reset, disable or role change: older sessions end
    demo: bool = False
    created_at: str = ""
    created_by: str = ""
    changed_at: str = ""
    changed_by: str = ""
    last_signin_at: str = ""
    source: str = field(default="users", compare=False)  # "users" (users.json) or "config" (config.toml)

    @property
    def role_label(self) -> str:
        return ROLE_LABELS.get(self.role, self.role)

    def locked(self, now: float) -> bool:
        return self.locked_until is not None and now < self.locked_until

    def public(self, now: float) -> dict:
        """What the admin page and `rhledger users list` show (never the hash)."""
        return {"username": self.username, "display_name": self.display_name, "role": self.role,
                "disabled": self.disabled, "must_change": self.must_change, "failed": self.failed,
                "locked_until": _utc(self.locked_until) if self.locked(now) else None,
                "demo": self.demo, "created_at": self.created_at, "changed_at": self.changed_at,
                "last_signin_at": self.last_signin_at, "source": self.source}


@dataclass(frozen=True)
class SignInResult:
    """status: ok, wrong (unknown name or wrong password), locked, disabled, demo-elsewhere."""

    status: str
    user: User | None = None
    locked_until: float | None = None
    rehashed: bool = False

    @property
    def ok(self) -> bool:
        return self.status == "ok"


def _utc(ts: float | None) -> str | None:
    if ts is None:
        return None
    return datetime.fromtimestamp(ts, timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def check_username(name: str) -> str:
    name = (name or "").strip()
    if not USERNAME_RE.match(name):
        raise AccountError(f"user name {name!r}: use 1-40 lower-case letters, digits, '.', '_' or '-', "
                           f"starting with a letter or digit")
    return name


def check_display_name(text: str) -> str:
    text = (text or "").strip()
    if not 1 <= len(text) <= 80 or any(ord(c) < 32 for c in text):
        raise AccountError("display name: use 1-80 printable characters")
    return text


def _write_private(path: Path, data: bytes) -> None:
    """Replace ``path`` with ``data`` (mode 0600): old or new after a crash, never a mix."""
    tmp = path.with_name(f".{path.name}.{os.getpid()}.{threading.get_ident()}.tmp")
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    dir_fd = os.open(path.parent, os.O_RDONLY)
    try:
        os.fsync(dir_fd)
    finally:
        os.close(dir_fd)


def _append_private(path: Path, line: str) -> None:
    fd = os.open(path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o600)
    with os.fdopen(fd, "a", encoding="utf-8") as fh:
        fh.write(line + "\n")
        fh.flush()
        os.fsync(fh.fileno())


def is_demo_dir(data_dir: Path) -> bool:
    return (Path(data_dir) / DEMO_MARKER).is_file()


_FIELDS = tuple(f for f in User.__dataclass_fields__ if f != "source")


class UserStore:
    """The accounts of one data directory. ``legacy``: clinic.config.Account of config.toml."""

    def __init__(self, data_dir: Path, legacy: Iterable = (), policy: LockPolicy = LockPolicy()):
        self.data_dir = Path(data_dir)
        self.path = self.data_dir / USERS_FILE
        self.log_path = self.data_dir / USERS_LOG
        self.policy = policy
        self._legacy = {a.username: User(a.username, a.display_name, a.role, a.password_hash, source="config")
                        for a in legacy}
        self._file_lock = FileLock(str(self.data_dir / USERS_LOCK), timeout=30)
        self._thread_lock = threading.RLock()
        self._cache: tuple[tuple, dict[str, User]] | None = None

    # ---- reading -------------------------------------------------------------------------

    def _read(self) -> dict[str, User]:
        try:
            st = self.path.stat()
        except FileNotFoundError:
            return {}
        key = (st.st_ino, st.st_mtime_ns, st.st_size)
        cached = self._cache
        if cached and cached[0] == key:
            return cached[1]
        try:
            doc = json.loads(self.path.read_text(encoding="utf-8"))
        except (OSError, ValueError) as e:
            raise AccountError(f"{self.path} cannot be read ({e}); restore it from a copy or remove it "
                               f"and make the accounts again with `rhledger users add`") from None
        if not isinstance(doc, dict) or doc.get("format") != FORMAT or not isinstance(doc.get("users"), dict):
            raise AccountError(f"{self.path} is not an rhledger users file")
        if doc.get("version") != VERSION:
            raise AccountError(f"{self.path} is version {doc.get('version')!r}; this rhledger reads version {VERSION}")
        users = {}
        for name, raw in doc["users"].items():
            known = {k: raw[k] for k in _FIELDS if k in raw}
            users[name] = User(**known)
        self._cache = (key, users)
        return users

    def get(self, username: str) -> User | None:
        return self._read().get(username) or self._legacy.get(username)

    def all(self) -> list[User]:
        merged = dict(self._legacy)
        merged.update(self._read())
        return [merged[k] for k in sorted(merged)]

    def has_accounts(self) -> bool:
        return bool(self._read() or self._legacy)

    # ---- writing -------------------------------------------------------------------------

    def _write(self, users: dict[str, User]) -> None:
        doc = {"format": FORMAT, "version": VERSION,
               "users": {k: {f: getattr(u, f) for f in _FIELDS} for k, u in sorted(users.items())}}
        _write_private(self.path, (json.dumps(doc, indent=1, ensure_ascii=False) + "\n").encode("utf-8"))
        self._cache = None

    def _log(self, action: str, username: str, by: str, now: float, **extra) -> None:
        line = {"at": _utc(now), "by": by, "action": action, "user": username} | extra
        _append_private(self.log_path, json.dumps(line, ensure_ascii=False, sort_keys=True))

    def _change(self, username: str, fn, *, action: str | None, by: str, now: float, **log):
        """Apply fn(User) -> User to one account under the lock; the legacy one moves in."""
        with self._thread_lock, self._file_lock:
            self._cache = None
            users = dict(self._read())
            current = users.get(username) or self._legacy.get(username)
            if current is None:
                raise AccountError(f"no account {username!r}; see `rhledger users list`")
            new = fn(current)
            users[username] = replace(new, source="users")
            self._write(users)
            if action:
                self._log(action, username, by, now, **log)
            return users[username]

    def add(self, username: str, role: str, *, display_name: str | None = None, password: str | None = None,
            by: str, now: float, demo: bool = False, password_hash: str | None = None) -> tuple[User, str | None]:
        """A new account. Without ``password`` a one-time password is made (returned, shown once)
        and must be changed at the first sign-in. ``password_hash``: demo data only."""
        username = check_username(username)
        check_role(role)
        display = check_display_name(display_name or username)
        otp = None
        if password_hash is None:
            if password is None:
                otp = password = passwords.one_time_password()
            else:
                passwords.check_policy(password)
            password_hash = passwords.hash_password(password)
        with self._thread_lock, self._file_lock:
            self._cache = None
            users = dict(self._read())
            if username in users or username in self._legacy:
                raise AccountError(f"there is already an account {username!r}")
            stamp = _utc(now)
            users[username] = User(username, display, role, password_hash, must_change=otp is not None,
                                   demo=demo, created_at=stamp, created_by=by, changed_at=stamp, changed_by=by)
            self._write(users)
            self._log("add", username, by, now, role=role)
        return users[username], otp

    def reset(self, username: str, *, by: str, now: float) -> str:
        """A new one-time password (returned), to change at next sign-in; unlocks; ends sessions."""
        otp = passwords.one_time_password()
        h = passwords.hash_password(otp)
        self._change(username, lambda u: replace(u, password_hash=h, must_change=True, failed=0, locked_until=None,
                                                 epoch=u.epoch + 1, changed_at=_utc(now), changed_by=by),
                     action="reset", by=by, now=now)
        return otp

    def set_password(self, username: str, password: str, *, by: str, now: float) -> User:
        passwords.check_policy(password, "new password")
        h = passwords.hash_password(password)
        return self._change(username, lambda u: replace(u, password_hash=h, must_change=False, changed_at=_utc(now),
                                                        changed_by=by), action="password", by=by, now=now)

    def disable(self, username: str, *, by: str, now: float) -> User:
        self._keep_an_admin(username, lambda u: u.disabled)
        return self._change(username, lambda u: replace(u, disabled=True, epoch=u.epoch + 1, changed_at=_utc(now),
                                                        changed_by=by), action="disable", by=by, now=now)

    def enable(self, username: str, *, by: str, now: float) -> User:
        return self._change(username, lambda u: replace(u, disabled=False, changed_at=_utc(now), changed_by=by),
                            action="enable", by=by, now=now)

    def set_role(self, username: str, role: str, *, by: str, now: float) -> User:
        check_role(role)
        if role != "admin":
            self._keep_an_admin(username, lambda u: u.role != "admin")
        return self._change(username, lambda u: replace(u, role=role, epoch=u.epoch + 1, changed_at=_utc(now),
                                                        changed_by=by), action="role", by=by, now=now, role=role)

    def unlock(self, username: str, *, by: str, now: float) -> User:
        return self._change(username, lambda u: replace(u, failed=0, locked_until=None), action="unlock",
                            by=by, now=now)

    def _keep_an_admin(self, username: str, gone) -> None:
        """Refuse to disable or demote the last enabled admin (nobody could manage accounts)."""
        others = [u for u in self.all() if u.role == "admin" and not u.disabled and u.username != username]
        target = self.get(username)
        if target is not None and target.role == "admin" and not target.disabled and not others:
            raise AccountError(f"{username!r} is the only enabled admin; make another admin first")

    # ---- signing in ----------------------------------------------------------------------

    def authenticate(self, username: str, password: str, *, now: float) -> SignInResult:
        """Check a password, count failures and lock; re-hash an older hash on success."""
        user = self.get((username or "").strip())
        if user is None:
            passwords.dummy_verify()
            return SignInResult("wrong")
        if user.disabled:
            return SignInResult("disabled", user)
        if user.demo and not is_demo_dir(self.data_dir):
            return SignInResult("demo-elsewhere", user)
        if user.locked(now):
            return SignInResult("locked", user, user.locked_until)
        ok, rehash = passwords.verify(user.password_hash, password)
        if not ok:
            after, minutes = self.policy.after, self.policy.minutes

            def fail(u: User) -> User:
                failed = u.failed + 1 if not (u.locked_until and now >= u.locked_until) else 1
                until = now + minutes * 60 if failed >= after else None
                return replace(u, failed=0 if until else failed, locked_until=until)

            new = self._change(user.username, fail, action=None, by="", now=now)
            if new.locked_until:
                self._log("locked", user.username, "sign-in", now, after=after, minutes=minutes)
                return SignInResult("locked", new, new.locked_until)
            return SignInResult("wrong", new)
        new_hash = passwords.hash_password(password) if rehash else user.password_hash

        def success(u: User) -> User:
            return replace(u, password_hash=new_hash, failed=0, locked_until=None, last_signin_at=_utc(now))

        new = self._change(user.username, success, action="rehash" if rehash else None, by="sign-in", now=now)
        return SignInResult("ok", new, rehashed=rehash)

    def log(self) -> list[dict]:
        """Every account event, oldest first."""
        try:
            text = self.log_path.read_text(encoding="utf-8")
        except FileNotFoundError:
            return []
        out = []
        for line in text.splitlines():
            try:
                out.append(json.loads(line))
            except ValueError:
                continue  # a torn last line after a crash
        return out


def as_dict(user: User) -> dict:
    return asdict(user)
