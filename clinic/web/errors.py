"""Error pages and answers: a plain message, never a stack trace; failures get a reference.

An HTTP error (400, 403, 404, ...) shows its message (JSON ``{error}`` under /api/). Anything
that fails inside the app is logged with a reference number (``<data>/logs/errors.log``, one
JSON line each, and the app's logger) and the person sees only the message and the reference
to quote to whoever looks after the laptop.
"""
from __future__ import annotations

import json
import os
import secrets
import traceback
from datetime import datetime, timezone

from flask import current_app, jsonify, render_template, request
from werkzeug.exceptions import HTTPException, InternalServerError

LOG_DIR = "logs"
LOG_FILE = "errors.log"
GENERIC = ("The laptop could not complete this request. Open the record to check what was saved before "
           "trying again, and tell whoever looks after this installation.")


def new_reference() -> str:
    """Eight characters in two groups, easy to read out on the phone: 'K7PX-2M9Q'."""
    alphabet = "ABCDEFGHJKMNPQRSTUVWXYZ23456789"
    raw = "".join(secrets.choice(alphabet) for _ in range(8))
    return f"{raw[:4]}-{raw[4:]}"


def log_failure(ref: str, exc: BaseException | None, message: str = "") -> None:
    """The reference, the request and the traceback: to the logger and <data>/logs/errors.log."""
    current_app.logger.error("request failed, reference %s: %s %s %s", ref, request.method, request.path,
                             message, exc_info=exc)
    try:
        folder = os.path.join(current_app.config["DATA_DIR"], LOG_DIR)
        os.makedirs(folder, mode=0o700, exist_ok=True)
        path = os.path.join(folder, LOG_FILE)
        line = {"at": datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"), "reference": ref,
                "method": request.method, "path": request.path, "endpoint": request.endpoint,
                "message": message,
                "traceback": "".join(traceback.format_exception(exc)) if exc is not None else ""}
        fd = os.open(path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o600)
        with os.fdopen(fd, "a", encoding="utf-8") as fh:
            fh.write(json.dumps(line, ensure_ascii=False) + "\n")
    except OSError:
        current_app.logger.exception("could not write %s/%s", LOG_DIR, LOG_FILE)


def _is_api() -> bool:
    return request.path.startswith("/api/")


def http_error(e: HTTPException):
    code = e.code or 500
    if code >= 500:
        return server_error(e)
    desc = e.description or ""
    if _is_api():
        return jsonify(error=desc), code
    return render_template("error.html", code=code, message=desc, reference=None), code


def server_error(e: BaseException):
    """Any failure: logged with a reference; the person sees the message and the reference."""
    ref = new_reference()
    original = getattr(e, "original_exception", None)
    # A view that aborts with 500 and its own words (the card could not be issued: ...) keeps them.
    said = e.description if isinstance(e, InternalServerError) and original is None and \
        e.description != InternalServerError.description else ""
    log_failure(ref, original or (None if said else e), said)
    message = said or GENERIC
    if _is_api():
        return jsonify(error=message, reference=ref), 500
    return render_template("error.html", code=500, message=message, reference=ref), 500


def init_app(app) -> None:
    app.register_error_handler(HTTPException, http_error)
    app.register_error_handler(Exception, server_error)
