"""Admin pages: staff accounts (add, disable, enable, reset, unlock, role) and the audit trail.

    /admin/users                      every account, its role and state; the add form
    /admin/users/<name>/<action>      disable | enable | reset | unlock | role (POST)
    /admin/audit?by=&record=&since=&until=   the audit trail, newest first, and account events

The same operations as `rhledger users ...` and `rhledger audit`, through clinic.accounts and
clinic.store.audit_query. A one-time password is shown once, on the answer page only.
"""
from __future__ import annotations

from flask import Blueprint, abort, current_app, flash, redirect, render_template, request, url_for

from clinic.accounts import roles
from clinic.accounts.passwords import PasswordPolicyError
from clinic.accounts.users import AccountError
from clinic.store.audit_query import AuditQuery, AuditQueryError, filter_events, run
from clinic.web.auth import clock, current_user
from clinic.web.db import get_settings, get_store, get_users

bp = Blueprint("admin", __name__, url_prefix="/admin")
ACTIONS = ("disable", "enable", "reset", "unlock", "role")


def _page(status=200, **extra):
    now = clock()
    users = [u.public(now) for u in get_users().all()]
    return render_template("admin/users.html", users=users, roles=roles.ROLES, labels=roles.ROLE_LABELS,
                           permissions=roles.ROLE_PERMISSIONS, words=roles.PERMISSIONS, nav_active="users",
                           warnings=current_app.extensions["rhledger"].get("file_warnings", []),
                           **({"errors": {}, "values": {}, "issued": None} | extra)), status


@bp.route("/users", methods=["GET"])
def users():
    return _page()


@bp.route("/users", methods=["POST"])
def user_add():
    f = request.form
    values = {k: f.get(k, "").strip() for k in ("username", "display_name", "role")}
    try:
        user, otp = get_users().add(values["username"], values["role"], display_name=values["display_name"] or None,
                                    by=current_user().username, now=clock())
    except (AccountError, PasswordPolicyError, ValueError) as e:
        return _page(422, errors={"_form": str(e)}, values=values)
    return _page(201, issued={"username": user.username, "password": otp, "what": "new account"})


@bp.route("/users/<username>/<action>", methods=["POST"])
def user_action(username, action):
    if action not in ACTIONS:
        abort(404, f"no action {action!r}; allowed: {', '.join(ACTIONS)}")
    store, me, now = get_users(), current_user().username, clock()
    if store.get(username) is None:
        abort(404, f"no account {username!r}")
    try:
        if action == "reset":
            otp = store.reset(username, by=me, now=now)
            return _page(200, issued={"username": username, "password": otp, "what": "password reset"})
        if action == "disable":
            if username == me:
                raise AccountError("you cannot disable your own account")
            store.disable(username, by=me, now=now)
        elif action == "enable":
            store.enable(username, by=me, now=now)
        elif action == "unlock":
            store.unlock(username, by=me, now=now)
        elif action == "role":
            store.set_role(username, request.form.get("role", ""), by=me, now=now)
    except (AccountError, ValueError) as e:
        return _page(422, errors={"_form": str(e)})
    flash({"disable": f"{username} is disabled and signed out everywhere.", "enable": f"{username} may sign in again.",
           "unlock": f"{username} is unlocked.", "role": f"{username} now has the role {request.form.get('role')}."}
          [action])
    return redirect(url_for("admin.users"))


@bp.route("/audit")
def audit():
    a = request.args
    errors = {}
    try:
        q = AuditQuery.parse(by=a.get("by", ""), record=a.get("record", ""), since=a.get("since", ""),
                             until=a.get("until", ""))
    except AuditQueryError as e:
        errors["_form"] = str(e)
        q = AuditQuery()
    tz = get_settings().tz
    lines, more = run(get_store(), q, tz)
    events = [] if q.record else filter_events(get_users().log(), q, tz)
    return render_template("admin/audit.html", lines=lines, more=more, events=events, q=q, args=a, errors=errors,
                           nav_active="audit"), (400 if errors else 200)
