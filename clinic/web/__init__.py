"""The Flask app: pages for the clinic laptop and phones, and the JSON API under /api/v1.

``create_app`` owns configuration (data directory, settings, secret key, the one Store per
app) and registers every blueprint. Pages and API live in small modules beside this one.
"""
from __future__ import annotations

import os
import secrets
from datetime import timedelta
from pathlib import Path

from flask import Flask

from clinic.config import data_dir_from, load_settings

STATIC_DIR = Path(__file__).resolve().parents[2] / "static"
SECRET_KEY_FILE = "secret_key"


def _secret_key(data_dir: Path) -> str:
    """Made once per installation and kept in <data>/secret_key, readable by the owner only."""
    path = data_dir / SECRET_KEY_FILE
    if path.exists():
        key = path.read_text(encoding="ascii").strip()
        if len(key) < 32:
            raise RuntimeError(f"{path} holds a key shorter than 32 characters; delete it to make a new one")
        return key
    key = secrets.token_hex(32)
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "w", encoding="ascii") as fh:
        fh.write(key + "\n")
        fh.flush()
        os.fsync(fh.fileno())
    return key


def create_app(data_dir=None, test_config=None) -> Flask:
    """Build the app for one data directory (argument, else $RHLEDGER_DATA, else ./instance)."""
    from clinic.signing.seal import BackupSeal
    from clinic.store import Store
    from clinic.store.errors import unwritable

    app = Flask(__name__, static_folder=str(STATIC_DIR), static_url_path="/static")
    # "//" in a path is not quietly redirected (an API client gets a 404 with a message instead).
    app.url_map.merge_slashes = False
    data = data_dir_from(data_dir or (test_config or {}).get("DATA_DIR")).resolve()
    app.config.from_mapping(
        DATA_DIR=str(data),
        SESSION_COOKIE_HTTPONLY=True,
        SESSION_COOKIE_SAMESITE="Lax",
        # Secure (HTTPS only) is switched on by `serve --lan` (clinic.web.lan.serve_https).
        SESSION_COOKIE_SECURE=False,
        PERMANENT_SESSION_LIFETIME=timedelta(hours=12),
        JSON_SORT_KEYS=False,
        MAX_CONTENT_LENGTH=2 * 1024 * 1024,
    )
    if test_config:
        app.config.update(test_config)
    settings = load_settings(data)
    if not app.config.get("SECRET_KEY"):
        try:
            app.config["SECRET_KEY"] = _secret_key(data)
        except OSError as e:  # a read-only or full data folder: say so, no traceback at start-up
            raise unwritable(e, data) or e from None
    store = Store(data, settings, seal=BackupSeal(data))
    from clinic.accounts.users import LockPolicy, UserStore
    from clinic.store.permissions import check_modes

    users = UserStore(data, legacy=settings.accounts, policy=LockPolicy(settings.lock_after, settings.lock_minutes))
    warnings = check_modes(data)
    for w in warnings:
        app.logger.warning("rhledger: %s", w)
    from clinic.reports.case_cache import CaseCache

    app.extensions["rhledger"] = {"settings": settings, "store": store, "users": users,
                                  "file_warnings": warnings, "cases": CaseCache()}
    store.daily_backup_if_due()

    from clinic.web import (
        admin_views,
        api,
        auth,
        db,
        errors,
        headers,
        helpers,
        pages,
        records_views,
        stock,
        tools_views,
    )

    db.init_app(app)
    auth.init_app(app)
    headers.init_app(app)
    helpers.init_app(app)
    stock.init_app(app)
    errors.init_app(app)
    app.register_blueprint(auth.bp)
    app.register_blueprint(admin_views.bp)
    app.register_blueprint(pages.bp)
    app.register_blueprint(records_views.bp)
    app.register_blueprint(tools_views.bp)
    app.register_blueprint(api.bp)

    from clinic.web import card_views, district_views, setup_views, supply_views

    app.register_blueprint(card_views.bp)
    app.register_blueprint(district_views.bp)
    app.register_blueprint(setup_views.bp)
    app.register_blueprint(supply_views.bp)
    return app
