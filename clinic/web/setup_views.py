"""Phone setup and the offline pages (blueprint ``setup``; no sign-in needed, see auth.py).

    /setup/          on the phone: install the clinic's CA certificate, then open the app
    /setup/ca.crt    the CA certificate (DER, application/x-x509-ca-cert)
    /setup/qr        on the laptop: the setup address as a QR code to scan with the phone
    /outbox          what waits on this phone (rendered in the browser by static/js/outbox/page.js)
    /offline         shown by the service worker for a page the phone has not kept
    /net/ping        204: "the laptop is reachable" for the connection indicator

``service_worker_response()`` serves static/sw.js with its cache version and pre-cache list
filled in (pages.service_worker calls it for /sw.js).
"""
from __future__ import annotations

import hashlib
import json
import re
import threading
from pathlib import Path

from flask import Blueprint, Response, abort, current_app, render_template, request, url_for

from clinic.web import lan
from clinic.web.db import get_data_dir

bp = Blueprint("setup", __name__)

SHELL_PAGES = ("/outbox", "/offline")
# Not pre-cached: the worker itself, bookkeeping files, licences (still served on request).
SKIP_PRECACHE = re.compile(
    r"(^sw\.js$|^manifest\.webmanifest$|(^|/)VERSIONS?\.txt$|(^|/)LICEN[CS]E[^/]*$|\.map$|(^|/)\.)"
)
TEMPLATES = Path(__file__).with_name("templates")
_version_lock = threading.Lock()
_version_cache: dict = {}


def _files(root: Path) -> list[Path]:
    return sorted(p for p in root.rglob("*") if p.is_file() and "__pycache__" not in p.parts)


def static_version(static_dir: Path) -> tuple[str, list[str]]:
    """(version, files to pre-cache). The version is a hash of every static file and
    template, so any change makes a new worker and new cache names. Recomputed only
    when a file's size or time changes."""
    static_dir = Path(static_dir)
    files = _files(static_dir)
    templates = _files(TEMPLATES) if TEMPLATES.is_dir() else []
    signature = tuple((str(p), st.st_size, st.st_mtime_ns) for p in files + templates for st in [p.stat()])
    with _version_lock:
        hit = _version_cache.get(static_dir)
        if hit and hit[0] == signature:
            return hit[1], hit[2]
        h = hashlib.sha256()
        for p in files + templates:
            h.update(str(p.relative_to(static_dir if p.is_relative_to(static_dir) else TEMPLATES)).encode() + b"\0")
            h.update(p.read_bytes())
            h.update(b"\0")
        version = h.hexdigest()[:16]
        rel = [p.relative_to(static_dir).as_posix() for p in files]
        precache = ["/static/" + r for r in rel if not SKIP_PRECACHE.search(r)]
        _version_cache[static_dir] = (signature, version, precache)
        return version, precache


def service_worker_response() -> Response:
    static_dir = Path(current_app.static_folder)
    source = static_dir / "sw.js"
    if not source.exists():
        abort(404, "static/sw.js is missing")
    version, precache = static_version(static_dir)
    config = {
        "version": version,
        "precache": precache,
        "shell": list(SHELL_PAGES),
        # Pages worth holding before the laptop goes out of reach (when signed in).
        "warm": [url_for("pages.today"), url_for("records.booking")],
    }
    text, n = re.subn(
        r"/\*@config\*/.*?/\*@end\*/",
        lambda _m: "/*@config*/ var CONFIG = " + json.dumps(config) + "; /*@end*/",
        source.read_text(encoding="utf-8"),
        count=1,
        flags=re.S,
    )
    if n != 1:
        abort(500, "static/sw.js has lost its /*@config*/ … /*@end*/ line")
    resp = Response(text, mimetype="text/javascript")
    resp.headers["Service-Worker-Allowed"] = "/"
    resp.headers["Cache-Control"] = "no-cache"
    return resp


def _lan_state() -> dict:
    """What the setup pages need to know about how the laptop is being served."""
    https_port = current_app.config.get("LAN_HTTPS_PORT")
    setup_port = current_app.config.get("LAN_SETUP_PORT")
    host = request.host.rsplit(":", 1)[0] if not request.host.startswith("[") else request.host.split("]")[0] + "]"
    addrs = lan.lan_addresses()
    return {
        "lan": bool(https_port),
        "https_port": https_port,
        "setup_port": setup_port,
        "secure": request.is_secure,
        "host": host,
        "app_url": f"https://{host}:{https_port}/" if https_port else None,
        "addresses": addrs,
        "fingerprint": lan.ca_fingerprint(get_data_dir()),
    }


@bp.route("/setup/")
def phone():
    return render_template("setup/phone.html", st=_lan_state())


@bp.route("/setup/ca.crt")
def ca_certificate():
    der = lan.ca_der(get_data_dir())
    if der is None:
        abort(404, "There is no clinic certificate yet: start the laptop with `rhledger serve --lan` once to make it.")
    resp = Response(der, mimetype="application/x-x509-ca-cert")
    resp.headers["Content-Disposition"] = 'attachment; filename="rhledger-clinic-ca.crt"'
    resp.headers["Cache-Control"] = "no-store"
    return resp


def qr_svg(text: str) -> str:
    """An inline SVG QR code (no XML declaration), black on white."""
    import qrcode
    import qrcode.image.svg

    img = qrcode.make(text, image_factory=qrcode.image.svg.SvgPathImage, box_size=10, border=2)
    svg = img.to_string(encoding="unicode")
    return re.sub(r"^<\?xml[^>]*\?>\s*", "", svg)


@bp.route("/setup/qr")
def qr():
    st = _lan_state()
    codes = []
    if st["lan"]:
        port = st["setup_port"] or st["https_port"]
        scheme = "http" if st["setup_port"] else "https"
        for addr in st["addresses"] or ["127.0.0.1"]:
            shown = f"[{addr}]" if ":" in addr else addr
            url = f"{scheme}://{shown}:{port}/setup/"
            codes.append({"url": url, "svg": qr_svg(url), "address": addr})
    return render_template("setup/qr.html", st=st, codes=codes)


@bp.route("/outbox")
def outbox():
    return render_template("offline/outbox.html")


@bp.route("/offline")
def offline():
    return render_template("offline/offline.html")


@bp.route("/net/ping")
def ping():
    resp = Response(status=204)
    resp.headers["Cache-Control"] = "no-store"
    return resp
