"""The installable, offline pieces as files: service worker, manifest, icons, vendored libraries."""
from __future__ import annotations

import hashlib
import json
import re
from pathlib import Path

import pytest
from PIL import Image

from clinic.web import STATIC_DIR
from clinic.web.setup_views import static_version

VENDOR = STATIC_DIR / "vendor"
# The page-side outbox scripts in the order base.html loads them (static/js/outbox/core.js).
OUTBOX_SCRIPTS = ["queue", "queue-send", "core", "status", "worker", "kept", "form-request", "form-messages",
                  "forms", "page", "start"]


def sw_config(client) -> dict:
    text = client.get("/sw.js").get_data(as_text=True)
    m = re.search(r"/\*@config\*/ var CONFIG = (.*?); /\*@end\*/", text)
    assert m, "the served worker has no filled-in CONFIG line"
    return json.loads(m.group(1))


def test_worker_is_served_for_the_whole_site_and_never_stale(anon):
    r = anon.get("/sw.js")
    r.close()
    assert r.status_code == 200
    assert r.mimetype == "text/javascript"
    assert r.headers["Service-Worker-Allowed"] == "/"
    assert r.headers["Cache-Control"] == "no-cache"


def test_worker_precaches_the_app_shell(anon):
    cfg = sw_config(anon)
    for path in (*(f"/static/js/outbox/{name}.js" for name in OUTBOX_SCRIPTS), "/static/js/app.js",
                 "/static/vendor/idb-keyval/idb-keyval.umd.js", "/static/css/app.css", "/static/icons/icon-192.png"):
        assert path in cfg["precache"]
    assert cfg["shell"] == ["/outbox", "/offline"]
    assert not [p for p in cfg["precache"] if p.endswith(("sw.js", "LICENSE", "VERSIONS.txt"))]
    for path in cfg["precache"]:
        r = anon.get(path)
        r.close()
        assert r.status_code == 200, path


def test_every_page_loads_the_outbox_scripts_in_order(anon):
    html = anon.get("/signin").get_data(as_text=True)
    loaded = re.findall(r'<script src="/static/js/outbox/([\w-]+)\.js"></script>', html)
    assert loaded == OUTBOX_SCRIPTS
    assert sorted(loaded) == sorted(p.stem for p in (STATIC_DIR / "js" / "outbox").glob("*.js")), \
        "a script in static/js/outbox is not loaded by base.html (or one loaded is missing)"
    assert html.index("/static/vendor/idb-keyval/idb-keyval.umd.js") < html.index("/static/js/outbox/queue.js")


def test_worker_imports_the_outbox_queue_it_shares_with_the_pages():
    sw = (STATIC_DIR / "sw.js").read_text(encoding="utf-8")
    assert ('importScripts("/static/vendor/idb-keyval/idb-keyval.umd.js", "/static/js/outbox/queue.js", '
            '"/static/js/outbox/queue-send.js");') in sw


def test_pages_kept_before_the_split_get_the_same_scripts_in_the_same_order():
    sw = (STATIC_DIR / "sw.js").read_text(encoding="utf-8")
    m = re.search(r"var REPLACED_SCRIPTS = \{(.*?)\};", sw, re.S)
    assert m, "static/sw.js has no REPLACED_SCRIPTS"
    replaced = re.findall(r'"(/static/js/[\w.-]+)": \[([^\]]*)\]', m.group(1))
    assert [src for src, _ in replaced] == ["/static/js/net-queue.js", "/static/js/outbox.js"]
    assert re.findall(r'"([\w-]+)"', "".join(names for _, names in replaced)) == OUTBOX_SCRIPTS
    for src, _ in replaced:
        assert not (STATIC_DIR / src.removeprefix("/static/")).exists(), src


def test_shell_pages_need_no_sign_in(anon):
    for path in ("/outbox", "/offline", "/net/ping"):
        assert anon.get(path).status_code in (200, 204), path


def test_cache_version_follows_the_static_files(tmp_path):
    (tmp_path / "js").mkdir()
    (tmp_path / "js" / "a.js").write_text("one")
    v1, files = static_version(tmp_path)
    assert files == ["/static/js/a.js"]
    (tmp_path / "js" / "a.js").write_text("two")
    v2, _ = static_version(tmp_path)
    assert v1 != v2 and re.fullmatch(r"[0-9a-f]{16}", v2)
    assert static_version(tmp_path)[0] == v2


def test_worker_never_caches_api_or_writes():
    sw = (STATIC_DIR / "sw.js").read_text(encoding="utf-8")
    assert 'if (req.method !== "GET") { return; }' in sw
    assert 'p.indexOf("/api/") === 0' in sw


def test_manifest_is_installable(anon):
    r = anon.get("/manifest.webmanifest")
    m = json.loads(r.get_data(as_text=True))
    r.close()
    assert m["display"] == "standalone" and m["start_url"] == "/" and m["scope"] == "/"
    sizes = {(i["sizes"], i.get("purpose", "any")) for i in m["icons"]}
    assert ("192x192", "any") in sizes and ("512x512", "any") in sizes and ("512x512", "maskable") in sizes
    for icon in m["icons"]:
        path = STATIC_DIR / icon["src"].removeprefix("/static/")
        assert path.exists(), icon["src"]
        if icon["type"] == "image/png":
            with Image.open(path) as img:
                w, h = img.size
            assert f"{w}x{h}" == icon["sizes"]


def versions() -> dict:
    out = {}
    for line in (VENDOR / "VERSIONS.txt").read_text(encoding="utf-8").splitlines():
        if line.startswith("#") or not line.strip():
            continue
        head, files, _ = (p.strip() for p in line.split("|", 2))
        name, version, integrity = head.split()
        out[name] = {"version": version, "integrity": integrity, "files": dict(f.split("=", 1) for f in files.split())}
    return out


@pytest.mark.parametrize("lib", sorted(p.name for p in VENDOR.iterdir() if p.is_dir()))
def test_each_vendored_library_has_its_licence_version_and_unchanged_files(lib):
    rec = versions().get(lib)
    assert rec, f"static/vendor/{lib} is not in VERSIONS.txt: run scripts/refresh-vendor.py"
    assert re.fullmatch(r"\d+\.\d+\.\d+", rec["version"])
    assert (VENDOR / lib / "LICENSE").exists()
    for name, digest in rec["files"].items():
        assert hashlib.sha256((VENDOR / lib / name).read_bytes()).hexdigest() == digest, f"{lib}/{name} was edited"


def test_nothing_is_fetched_from_outside_the_laptop():
    ours = [STATIC_DIR / "sw.js", *sorted((STATIC_DIR / "js").rglob("*.js")),
            *sorted((STATIC_DIR / "css").glob("*.css"))]
    templates = sorted((Path(__file__).parents[2] / "clinic" / "web" / "templates").rglob("*.html"))
    for path in ours + templates:
        text = path.read_text(encoding="utf-8")
        # The only absolute URLs allowed are the SVG namespace and the setup addresses built at run time.
        found = [u for u in re.findall(r"""(?:src|href|url\()\s*=?\s*["']?(https?://[^"')\s]+)""", text)]
        assert not found, f"{path.name} loads {found}"
