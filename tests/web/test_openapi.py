"""openapi.yaml describes every /api/v1 route of the app, and nothing that is not one."""
from __future__ import annotations

import re

import yaml

from clinic.web.api import OPENAPI_FILE


def _routes(app) -> set[tuple[str, str]]:
    out = set()
    for rule in app.url_map.iter_rules():
        if not rule.rule.startswith("/api/v1/"):
            continue
        path = re.sub(r"<(?:[^:>]+:)?([^>]+)>", r"{\1}", rule.rule[len("/api/v1"):])
        for m in rule.methods - {"HEAD", "OPTIONS"}:
            out.add((path, m.lower()))
    return out


def _described() -> set[tuple[str, str]]:
    doc = yaml.safe_load(OPENAPI_FILE.read_text(encoding="utf-8"))
    assert doc["openapi"].startswith("3.")
    out = set()
    for path, ops in doc["paths"].items():
        for m in ops:
            if m in ("get", "post", "patch", "put", "delete"):
                out.add((path, m))
    return out


def test_every_api_route_is_described_in_openapi(app):
    missing = _routes(app) - _described()
    assert not missing, f"routes not in openapi.yaml: {sorted(missing)}"


def test_openapi_describes_no_route_the_app_lacks(app):
    extra = _described() - _routes(app)
    assert not extra, f"openapi.yaml describes routes the app does not have: {sorted(extra)}"


def test_openapi_yaml_is_served(client):
    r = client.get("/api/v1/openapi.yaml")
    assert r.status_code == 200
    assert yaml.safe_load(r.get_data(as_text=True))["info"]["title"] == "rhledger clinic API"
