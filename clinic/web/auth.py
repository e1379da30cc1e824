"""Sign-in, the session, who may do what, and CSRF protection.

Accounts come from settings.accounts (config.toml, werkzeug password hashes). Every
request needs a signed-in session except the endpoints in ``PUBLIC_ENDPOINTS`` (and any
endpoint of the ``setup`` blueprint, the LAN setup page). Pages redirect to sign-in; the
JSON API answers 401.

CSRF: each session holds a random token (``csrf_token()``). Every form POST carries it in
the hidden field ``csrf_token``; every fetch to /api/v1 that writes sends it in the header
``X-CSRF-Token`` (pages put it in ``<meta name="csrf-token">``; GET /api/v1/session returns
it too). A missing or wrong token is refused with 403.
"""
from __future__ import annotations

import functools
import hmac
import secrets
from urllib.parse import urlsplit

from flask import Blueprint, abort, flash, g, jsonify, redirect, render_template, request, session, url_for
from flask.sessions import SecureCookieSessionInterface
from werkzeug.security import check_password_hash

from clinic.web.db import get_settings

bp = Blueprint("auth", __name__)

PUBLIC_ENDPOINTS = {"auth.signin", "static", "pages.service_worker", "pages.manifest"}
PUBLIC_BLUEPRINTS = {"setup"}
SAFE_METHODS = {"GET", "HEAD", "OPTIONS"}
# Roles that may write records (a district officer reads).
WRITE_ROLES = ("midwife", "clinician", "lab", "admin")


class ServerClockSessions(SecureCookieSessionInterface):
    """Session cookies without an expiry date, so they do not depend on the phone's clock
    agreeing with the laptop's: a browser whose clock runs ahead would drop a cookie that
    "expired" the moment it arrived. The lifetime is kept by the laptop alone: the cookie's
    signature carries the laptop's time and is refused after PERMANENT_SESSION_LIFETIME."""

    def get_expiration_time(self, app, session):
        return None


def current_user():
    """The signed-in clinic.config.Account, or None."""
    if "user" not in g:
        name = session.get("user")
        g.user = get_settings().account(name) if name else None
    return g.user


def csrf_token() -> str:
    tok = session.get("csrf")
    if not tok:
        tok = session["csrf"] = secrets.token_urlsafe(32)
    return tok


def is_api() -> bool:
    return request.path.startswith("/api/")


def _refuse_unsigned():
    if is_api():
        return jsonify(error="not signed in", signin=url_for("auth.signin")), 401
    nxt = request.full_path if request.method == "GET" else request.path
    return redirect(url_for("auth.signin", next=nxt.rstrip("?")))


def login_required(view):
    """Pages redirect to sign-in; /api/ answers 401 JSON."""
    @functools.wraps(view)
    def wrapped(*a, **kw):
        if current_user() is None:
            return _refuse_unsigned()
        return view(*a, **kw)
    return wrapped


def role_required(*roles):
    """Signed in and holding one of ``roles``; otherwise 403 (JSON under /api/)."""
    def deco(view):
        @functools.wraps(view)
        def wrapped(*a, **kw):
            user = current_user()
            if user is None:
                return _refuse_unsigned()
            if user.role not in roles:
                msg = f"your role ({user.role}) may not do this; allowed: {', '.join(roles)}"
                if is_api():
                    return jsonify(error=msg), 403
                abort(403, msg)
            return view(*a, **kw)
        return wrapped
    return deco


def _guard():
    """Run before every request: session required, CSRF token on writes."""
    ep = request.endpoint or ""
    public = ep in PUBLIC_ENDPOINTS or ep.split(".", 1)[0] in PUBLIC_BLUEPRINTS
    if not public and current_user() is None:
        return _refuse_unsigned()
    if request.method not in SAFE_METHODS and ep.split(".", 1)[0] not in PUBLIC_BLUEPRINTS:
        sent = request.headers.get("X-CSRF-Token") or request.form.get("csrf_token") or ""
        if not session.get("csrf") or not hmac.compare_digest(sent, session["csrf"]):
            msg = "the form's security token is missing or out of date; reload the page and try again"
            if is_api():
                return jsonify(error=msg), 403
            abort(403, msg)
    return None


def _safe_next(target: str | None) -> str:
    if target:
        parts = urlsplit(target)
        if not parts.scheme and not parts.netloc and target.startswith("/") and not target.startswith("//"):
            return target
    return url_for("pages.today")


@bp.route("/signin", methods=["GET", "POST"])
def signin():
    error = None
    username = ""
    if request.method == "POST":
        username = request.form.get("username", "").strip()
        password = request.form.get("password", "")
        acct = get_settings().account(username)
        if not username:
            error = "Enter your user name."
        elif acct is None or not check_password_hash(acct.password_hash, password):
            error = "User name or password is wrong."
        else:
            session.clear()
            session.permanent = True
            session["user"] = acct.username
            csrf_token()
            return redirect(_safe_next(request.args.get("next")))
    return render_template("signin.html", error=error, username=username,
                           next=request.args.get("next", "")), (401 if error else 200)


@bp.route("/signout", methods=["POST"])
def signout():
    session.clear()
    flash("Signed out.")
    return redirect(url_for("auth.signin"))


def init_app(app) -> None:
    app.session_interface = ServerClockSessions()
    app.before_request(_guard)
    app.add_template_global(csrf_token, "csrf_token")  # macros imported without context use it

    @app.context_processor
    def _inject():
        return {"current_user": current_user(), "csrf_token": csrf_token}
