"""The service worker at /sw.js (scope /, never cached) and the manifest, served without a session."""
from __future__ import annotations

import pytest


def test_service_worker_is_served_at_the_root_with_scope_header(anon):
    with anon.get("/sw.js") as r:
        assert r.status_code == 200
        assert r.headers["Service-Worker-Allowed"] == "/"
        assert "no-cache" in r.headers["Cache-Control"]
        assert r.mimetype == "text/javascript"


def test_manifest_is_served(anon):
    with anon.get("/manifest.webmanifest") as r:
        assert r.status_code == 200
        assert r.mimetype == "application/manifest+json"


@pytest.mark.parametrize("url", ["/nope", "/pregnancies/x/y/z"])
def test_unknown_page_is_a_404_page(client, url):
    r = client.get(url)
    assert r.status_code == 404
    assert "Not found" in r.get_data(as_text=True)


def test_unknown_api_route_is_json_404(client):
    r = client.get("/api/v1/nope")
    assert r.status_code == 404 and "error" in r.get_json()


def test_unexpected_failure_is_a_clear_500(data_dir, monkeypatch):
    from clinic.web import create_app
    from tests.web.conftest import sign_in

    app = create_app(data_dir, test_config={"TESTING": False, "PROPAGATE_EXCEPTIONS": False})
    c = sign_in(app)
    import clinic.web.worklist as wl

    monkeypatch.setattr(wl, "build", lambda flt="all": 1 / 0)
    r = c.get("/")
    assert r.status_code == 500
    assert "could not complete this request" in r.get_data(as_text=True)
    r = c.get("/api/v1/worklist")
    assert r.status_code == 500 and "could not complete" in r.get_json()["error"]
