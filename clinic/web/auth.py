"""Sign-in, the session, who may do what, and CSRF protection.

Accounts: clinic.accounts.users.UserStore (``<data>/users.json``; older config.toml accounts
still read). Permissions: clinic.accounts.roles, per endpoint in clinic.web.access. A
``before_request`` guard runs on every request:

1. the endpoint's rule from ``access.ENDPOINTS`` (an endpoint not listed is refused);
2. the session: it ends after ``[security] idle_minutes`` without use (default 15), on
   sign-out, and when an admin resets, disables or changes the role of the account;
3. no session: pages redirect to sign-in, /api/ answers 401 JSON;
4. a one-time password must be changed before anything else;
5. the role must hold the endpoint's permission, else 403 naming the role;
6. CSRF: each session holds a random token (``csrf_token()``); every form POST carries it
   in the hidden field ``csrf_token``, every fetch that writes in the header ``X-CSRF-Token``
   (pages put it in ``<meta name="csrf-token">``; GET /api/v1/session returns it). A missing
   or wrong token is refused with 403.

Sign-in: wrong passwords in a row lock the account (``[security] lock_after``, default 5,
for ``lock_minutes``, default 15; an admin may unlock it sooner), and one device that keeps
failing is slowed down (429). "Switch staff" signs the person out and shows the sign-in page
for the next one.
"""
from __future__ import annotations

import hmac
import math
import secrets
import threading
import time
from collections import deque
from datetime import datetime
from urllib.parse import urlsplit

from flask import Blueprint, abort, current_app, flash, g, jsonify, redirect, render_template, request, session, url_for
from flask.sessions import SecureCookieSessionInterface

from clinic.accounts import roles
from clinic.accounts.passwords import PasswordPolicyError
from clinic.accounts.users import AccountError, is_demo_dir
from clinic.web import access
from clinic.web.db import get_data_dir, get_settings, get_users

bp = Blueprint("auth", __name__)

# Not "activity": the outbox asks who is signed in every 15 s while entries wait.
PASSIVE_ENDPOINTS = {"api.session_info", "static", "pages.service_worker", "pages.manifest"}
# Reachable while a one-time password waits to be changed.
BEFORE_NEW_PASSWORD = {"auth.password", "auth.signout", "auth.switch", "api.session_info"}
# A device (address) failing this many sign-ins within the window waits.
DEVICE_FAILURES, DEVICE_WINDOW_S = 20, 600
SESSION_MAX_S = 12 * 3600


def clock() -> float:
    """Seconds since the epoch; tests may set app.config["SECURITY_CLOCK"] to a callable."""
    fn = current_app.config.get("SECURITY_CLOCK")
    return fn() if fn else time.time()


def _state() -> dict:
    ext = current_app.extensions["rhledger"]
    st = ext.get("auth")
    if st is None:
        st = ext.setdefault("auth", {"lock": threading.Lock(), "failures": {}, "ended": {}})
    return st


class ServerClockSessions(SecureCookieSessionInterface):
    """Session cookies without an expiry date, so they do not depend on the phone's clock
    agreeing with the laptop's: a browser whose clock runs ahead would drop a cookie that
    "expired" the moment it arrived. The lifetime is kept by the laptop alone: the cookie's
    signature carries the laptop's time and is refused after PERMANENT_SESSION_LIFETIME."""

    def get_expiration_time(self, app, session):
        return None


def current_user():
    """The signed-in clinic.accounts.users.User, or None."""
    if "user" not in g:
        g.user = _session_user()
    return g.user


def _session_user():
    name = session.get("user")
    if not name:
        return None
    user = get_users().get(name)
    if user is None or user.disabled or user.epoch != session.get("epoch"):
        return None
    if session.get("sid") in _state()["ended"]:
        return None
    return user


def may(permission: str) -> bool:
    """Whether the signed-in person holds ``permission`` (templates use it for links and menus)."""
    u = current_user()
    return u is not None and roles.may(u.role, permission)


def may_write_kind(kind: str) -> bool:
    u = current_user()
    return u is not None and roles.may_write_kind(u.role, kind)


def _forbidden(what: str):
    u = current_user()
    role = u.role if u else "none"
    abort(403, f"your role ({role}) may not {what}")


def require(permission: str) -> None:
    if not may(permission):
        _forbidden(roles.PERMISSIONS[permission])


def require_kind(kind: str) -> None:
    """403 unless the role may write records of ``kind`` (create, amend, void)."""
    if kind not in roles.KIND_PERMISSION:
        return  # an unknown kind is the validation's 422, not a permission question
    if not may_write_kind(kind):
        _forbidden(f"{roles.PERMISSIONS[roles.permission_for_kind(kind)]} (a {kind} record)")


def csrf_token() -> str:
    tok = session.get("csrf")
    if not tok:
        tok = session["csrf"] = secrets.token_urlsafe(32)
    return tok


def is_api() -> bool:
    return request.path.startswith("/api/")


def home_url(user=None) -> str:
    user = user or current_user()
    if get_settings().facility_kind == "district" and user is not None and roles.may(user.role, roles.REPORT):
        return url_for("district.index")
    return url_for(roles.home_endpoint(user.role if user else None))


def _refuse_unsigned(reason: str | None = None):
    if is_api():
        body = {"error": "not signed in", "signin": url_for("auth.signin")}
        if reason:
            body["reason"] = reason
        return jsonify(body), 401
    nxt = request.full_path if request.method == "GET" else request.path
    args = {"next": nxt.rstrip("?")}
    if reason:
        args["ended"] = reason
    return redirect(url_for("auth.signin", **args))


def _end_session(why: str) -> None:
    sid = session.get("sid")
    if sid:
        st = _state()
        with st["lock"]:
            now = clock()
            st["ended"][sid] = now + SESSION_MAX_S
            for k, until in list(st["ended"].items()):
                if until < now:
                    del st["ended"][k]
    session.clear()
    g.user = None
    g.session_ended = why


def _check_session_age() -> None:
    """End a session idle for longer than the facility allows (or older than 12 hours)."""
    if not session.get("user"):
        return
    now = clock()
    idle = get_settings().idle_minutes * 60
    seen = session.get("seen") or 0
    if now - seen > idle:
        _end_session("idle")
    elif now - (session.get("auth_at") or 0) > SESSION_MAX_S:
        _end_session("expired")


def _csrf_ok() -> bool:
    sent = request.headers.get("X-CSRF-Token") or request.form.get("csrf_token") or ""
    return bool(session.get("csrf")) and hmac.compare_digest(sent, session["csrf"])


def _refuse(status: int, msg: str):
    if is_api():
        return jsonify(error=msg), status
    abort(status, msg)


def _guard():
    """Run before every request: the endpoint's rule, the session, the role, the CSRF token."""
    ep = request.endpoint
    try:
        rule = access.rule_for(ep, request.method)
    except access.NotListed as e:
        current_app.logger.error("refused: %s", e)
        return _refuse(403, "this address is not open to any role")
    _check_session_age()
    user = current_user()
    writes = request.method not in access.READ_METHODS
    if rule == access.PUBLIC:
        if writes and not (ep or "").startswith("setup.") and ep is not None and not _csrf_ok():
            return _refuse(403, "the form's security token is missing or out of date; reload the page and try again")
        return None
    if user is None:
        return _refuse_unsigned(g.get("session_ended"))
    if user.must_change and ep not in BEFORE_NEW_PASSWORD:
        if is_api():
            return jsonify(error="choose a new password first (the one you signed in with was for once only)",
                           change=url_for("auth.password")), 403
        return redirect(url_for("auth.password"))
    if not access.allows(user.role, rule):
        return _refuse(403, f"your role ({user.role}) may not open this: it needs permission to "
                            f"{access.permission_words(rule)}")
    if writes and not _csrf_ok():
        return _refuse(403, "the form's security token is missing or out of date; reload the page and try again")
    if ep not in PASSIVE_ENDPOINTS:
        session["seen"] = int(clock())
    return None


def _safe_next(target: str | None, user) -> str:
    if target:
        parts = urlsplit(target)
        if not parts.scheme and not parts.netloc and target.startswith("/") and not target.startswith("//") \
                and "\\" not in target:
            return target
    return home_url(user)


def _device() -> str:
    return request.remote_addr or "-"


def _device_waits() -> int:
    """Seconds this device must wait before another sign-in attempt (0: none)."""
    st = _state()
    now = clock()
    with st["lock"]:
        q = st["failures"].get(_device())
        if not q:
            return 0
        while q and q[0] < now - DEVICE_WINDOW_S:
            q.popleft()
        if len(q) < DEVICE_FAILURES:
            return 0
        return int(q[0] + DEVICE_WINDOW_S - now) + 1


def _device_failed() -> None:
    st = _state()
    with st["lock"]:
        st["failures"].setdefault(_device(), deque()).append(clock())


def _local_time(ts: float) -> str:
    return datetime.fromtimestamp(ts, get_settings().tz).strftime("%H:%M")


def _lock_message(until: float) -> str:
    mins = max(1, math.ceil((until - clock()) / 60))
    s = get_settings()
    return (f"This account is locked after {s.lock_after} wrong passwords in a row, until {_local_time(until)} "
            f"(about {mins} min). Wait until then, or ask an administrator to unlock it.")


def _start_session(user) -> None:
    session.clear()
    session.permanent = True
    now = int(clock())
    session.update(user=user.username, epoch=user.epoch, sid=secrets.token_urlsafe(16), seen=now, auth_at=now)
    csrf_token()
    g.user = user


def demo_notice():
    """The demo sign-ins (published), when this data directory is a demo one; else None."""
    d = get_data_dir()
    if not is_demo_dir(d):
        return None
    import json

    try:
        doc = json.loads((d / "DEMO").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        doc = {}
    return {"text": doc.get("text") or "Demo installation: invented people and places only.",
            "accounts": [a for a in doc.get("accounts", []) if isinstance(a, list) and len(a) == 3]}


_ENDED_WORDS = {"idle": "You were signed out after {m} minutes without use. Sign in again.",
                "expired": "Your session ended (12 hours since signing in). Sign in again."}


@bp.route("/signin", methods=["GET", "POST"])
def signin():
    error = None
    status = 200
    username = ""
    s = get_settings()
    if request.method == "POST":
        username = request.form.get("username", "").strip().lower()
        password = request.form.get("password", "")
        wait = _device_waits()
        if wait:
            error, status = (f"Too many failed sign-ins from this device. Wait {wait // 60 + 1} min, then try "
                             f"again."), 429
        elif not username:
            error, status = "Enter your user name.", 401
        else:
            res = get_users().authenticate(username, password, now=clock())
            if res.ok:
                _start_session(res.user)
                if res.user.must_change:
                    flash("Choose your own password now: the one you signed in with was for once only.")
                    return redirect(url_for("auth.password"))
                return redirect(_safe_next(request.args.get("next"), res.user))
            _device_failed()
            if res.status == "locked":
                error, status = _lock_message(res.locked_until), 423
            elif res.status == "disabled":
                error, status = "This account is disabled. Ask an administrator.", 403
            elif res.status == "demo-elsewhere":
                error, status = ("This is a demo account: it signs in only in a demo installation, never in a "
                                 "real one."), 403
            else:
                error, status = "User name or password is wrong.", 401
    ended = request.args.get("ended")
    notice = _ENDED_WORDS.get(ended, "").format(m=s.idle_minutes) if ended else ""
    resp = render_template("signin.html", error=error, username=username, next=request.args.get("next", ""),
                           notice=notice, demo=demo_notice(), switching=current_user())
    return resp, status


@bp.route("/signout", methods=["POST"])
def signout():
    _end_session("signed-out")
    flash("Signed out.")
    return redirect(url_for("auth.signin"))


@bp.route("/switch", methods=["POST"])
def switch():
    """Quick switch of staff on one device: sign this person out, sign-in page for the next."""
    name = current_user().display_name
    _end_session("switched")
    flash(f"{name} is signed out. Next person: sign in.")
    return redirect(url_for("auth.signin"))


@bp.route("/account/password", methods=["GET", "POST"])
def password():
    user = current_user()
    errors: dict = {}
    if request.method == "POST":
        from clinic.accounts.passwords import verify

        old = request.form.get("current", "")
        new = request.form.get("new", "")
        again = request.form.get("again", "")
        if not verify(user.password_hash, old)[0]:
            errors["current"] = "is not your current password"
        if new != again:
            errors["again"] = "does not match the new password"
        if new and new == old:
            errors["new"] = "must differ from the current one"
        if not errors:
            try:
                get_users().set_password(user.username, new, by=user.username, now=clock())
            except (PasswordPolicyError, AccountError) as e:
                errors["new"] = str(e).split(": ", 1)[-1]
            else:
                g.user = None
                flash("Your new password is saved.")
                return redirect(home_url(current_user()))
    return render_template("account/password.html", errors=errors, must_change=user.must_change), \
        (422 if errors else 200)


def init_app(app) -> None:
    app.session_interface = ServerClockSessions()
    app.before_request(_guard)
    app.add_template_global(csrf_token, "csrf_token")  # macros imported without context use it
    app.add_template_global(may, "may")
    app.add_template_global(may_write_kind, "may_write_kind")

    @app.context_processor
    def _inject():
        user = current_user()
        return {"current_user": user, "csrf_token": csrf_token,
                "idle_seconds": get_settings().idle_minutes * 60 if user else None}
