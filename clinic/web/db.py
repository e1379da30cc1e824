"""Access to the app's Store, Settings and protocol profile, and the plan of a pregnancy.

One Store is opened per app by ``create_app``; views reach it through ``get_store()``.
"""
from __future__ import annotations

from datetime import datetime, timezone
from pathlib import Path

from flask import Flask, current_app

from clinic.care_inputs import care_inputs, plan_from_settings


def _ext() -> dict:
    return current_app.extensions["rhledger"]


def get_store():
    """The app's clinic.store.Store."""
    return _ext()["store"]


def get_users():
    """The app's clinic.accounts.users.UserStore (<data>/users.json)."""
    return _ext()["users"]


def get_data_dir() -> Path:
    """The app's data folder (config.toml, records, keys, trust list, cards, bundles)."""
    return Path(current_app.config["DATA_DIR"])


def get_cases():
    """The app's ``clinic.reports.case_cache.CaseCache``: pregnancies and plans kept between pages."""
    return _ext()["cases"]


def get_settings():
    """The app's clinic.config.Settings."""
    return _ext()["settings"]


def utcnow() -> datetime:
    """Now, aware, UTC. Tests may pin it with app.config["RHLEDGER_NOW"] (an aware datetime)."""
    pinned = current_app.config.get("RHLEDGER_NOW")
    return pinned if pinned is not None else datetime.now(timezone.utc)


def get_profile():
    """The facility's protocol profile, with its overrides (``clinic.care_inputs``)."""
    return care_inputs(get_settings())[0]


def plan_for(pregnancy_id: str, history: tuple | None = None):
    """The care engine's Plan for one pregnancy, now, with what her earlier pregnancies in the
    store hand on. ``history``: the (woman, pregnancy, entries) of ``store.history(pregnancy_id)``
    when the caller has read it already."""
    store = get_store()
    return plan_from_settings(get_settings(), history or store.history(pregnancy_id), utcnow(), store=store)


def _unwritable(e):
    """A full disk or a read-only data folder, in plain words (503: the laptop cannot save now)."""
    from flask import jsonify, render_template, request

    current_app.logger.error("%s", e)
    if request.path.startswith("/api/"):
        return jsonify(error=str(e)), 503
    return render_template("error.html", code=503, message=str(e)), 503


def init_app(app: Flask) -> None:
    """Nothing to set up or close per request: the Store is durable before each call returns.
    A store that cannot be written answers in plain words (``_unwritable``)."""
    from clinic.store.errors import StoreUnwritable

    app.register_error_handler(StoreUnwritable, _unwritable)
