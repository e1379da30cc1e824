"""A property-based scan of the API described in clinic/web/openapi.yaml (Hypothesis).

Requests are generated from the document itself: each operation's path and query parameters
and request body schema, with values that fit and values that do not (wrong types, odd text,
unknown ids, other kinds' fields, bodies that are not objects), sent by every role and without
a session. Every answer must be 2xx, or 4xx with a message (``error`` or ``errors``), never a
5xx. At least 2,000 requests in all (``QUOTA``).
"""
from __future__ import annotations

import json
import string
from pathlib import Path
from urllib.parse import quote, urlencode

import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from clinic.accounts.roles import ROLES
from clinic.records.schema import KINDS
from clinic.web.api import OPENAPI_FILE
from tests.security.world import Client, make_world

DOC = yaml.safe_load(Path(OPENAPI_FILE).read_text(encoding="utf-8"))
# Examples per operation; 2,000 or more in all.
QUOTA = {("/session", "get"): 100, ("/records", "post"): 450, ("/bookings", "post"): 300,
         ("/records/{record_id}", "get"): 150, ("/records/{record_id}", "patch"): 350,
         ("/pregnancies/{pregnancy_id}", "get"): 150, ("/worklist", "get"): 120, ("/women", "get"): 150,
         ("/calc/{name}", "get"): 300, ("/openapi.yaml", "get"): 50}
SENT: dict[tuple[str, str], int] = {}
STATUSES: dict[tuple[str, str], set[int]] = {}

TEXT = st.text(st.characters(blacklist_categories=("Cs",)), max_size=40)
FIELD_NAMES = sorted({f.name for k in KINDS.values() for f in k.fields})


def _resolve(schema):
    while isinstance(schema, dict) and "$ref" in schema:
        node = DOC
        for part in schema["$ref"].lstrip("#/").split("/"):
            node = node[part]
        schema = node
    return schema


def _plausible_value(field):
    """A value for a schema field: often right, often a little wrong."""
    t = field.type
    base = {
        "str": TEXT, "ref": TEXT,
        "int": st.integers(-5, 200) if field.max is None else st.integers(int(field.min or 0) - 2, int(field.max) + 2),
        "float": st.floats(allow_nan=True, allow_infinity=True) | st.floats(-10, 200),
        "bool": st.booleans() | st.sampled_from(["yes", "no", "maybe"]),
        "date": st.dates().map(str) | st.sampled_from(["2026-02-30", "yesterday", ""]),
        "datetime": st.datetimes().map(lambda d: d.isoformat()) | st.sampled_from(["2026-01-01T10:00", "soon"]),
        "ga": st.sampled_from(["28+3", "4+0", "44+0", "45+0", "12", "x+y", ""]) | st.integers(-10, 400),
        "choice": st.sampled_from(list(field.choices) or ["?"]) | TEXT,
        "choices": st.lists(st.sampled_from(list(field.choices) or ["?"]) | TEXT, max_size=3),
    }.get(t, TEXT)
    return base | st.none() | st.integers() | st.lists(st.integers(), max_size=2)


def _fields_for(kind: str | None):
    if kind in KINDS:
        return st.fixed_dictionaries({}, optional={f.name: _plausible_value(f) for f in KINDS[kind].fields})
    junk = st.one_of(TEXT, st.integers(), st.floats(allow_nan=False), st.booleans(), st.none())
    return st.dictionaries(st.sampled_from(FIELD_NAMES) | TEXT, junk, max_size=5)


@st.composite
def _from_schema(draw, schema, ids, name=""):
    schema = _resolve(schema)
    if "enum" in schema:
        return draw(st.sampled_from(schema["enum"]) | TEXT)
    t = schema.get("type")
    if t == "object" or "properties" in schema:
        props = schema.get("properties", {})
        required = set(schema.get("required", []))
        out = {}
        for key, sub in props.items():
            if key in required or draw(st.booleans()):
                out[key] = draw(_from_schema(_resolve(sub), ids, key))
        if schema.get("additionalProperties") and name in ("fields", "changes"):
            out.update(draw(_fields_for(draw(st.sampled_from(list(KINDS)) | st.none()))))
        return out
    if t == "string":
        if schema.get("format") == "uuid" or name.endswith("_id") or name == "id":
            return draw(st.sampled_from(ids) | st.uuids().map(str) | TEXT)
        if name == "kind":
            return draw(st.sampled_from(list(KINDS)) | TEXT)
        return draw(TEXT)
    if t == "integer":
        return draw(st.integers(-3, 12) | st.sampled_from(["1", None, 1.5]))
    if t == "boolean":
        return draw(st.booleans() | st.sampled_from(["true", 0]))
    return draw(st.none() | TEXT | st.integers())


def _json_junk():
    scalars = st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False) | TEXT
    return st.recursive(scalars, lambda c: st.lists(c, max_size=3) | st.dictionaries(TEXT, c, max_size=3),
                        max_leaves=8)


@st.composite
def _near_valid(draw, path: str, ids: list[str]):
    """A body that the app would accept, with one field perhaps changed: reaches the store."""
    from tests.security.world import example

    def mutate(fields: dict, kind: str) -> dict:
        fields = dict(fields)
        if draw(st.booleans()) and fields:
            name = draw(st.sampled_from(sorted(fields)))
            fields[name] = draw(_plausible_value(KINDS[kind].field(name)))
        return fields

    if path == "/records":
        kind = draw(st.sampled_from(list(KINDS)))
        body = {"id": draw(st.uuids()).__str__(), "kind": kind, "fields": mutate(example(kind), kind)}
        parent = KINDS[kind].parent
        if parent == "pregnancy":
            body["pregnancy_id"] = ids[1]
        elif parent == "woman":
            body["woman_id"] = ids[0]
        return body
    if path == "/records/{record_id}":
        kind = draw(st.sampled_from(list(KINDS)))
        return {"changes": mutate(example(kind), kind), "reason": draw(TEXT),
                "expected_version": draw(st.integers(1, 3))}
    if path == "/bookings":
        return {"woman": {"id": str(draw(st.uuids())), "fields": mutate(example("woman"), "woman")},
                "pregnancy": {"id": str(draw(st.uuids())), "fields": mutate(example("pregnancy"), "pregnancy")},
                "confirm_not_duplicate": draw(st.booleans())}
    return draw(_json_junk())


def _operation(path: str, method: str) -> dict:
    item = DOC["paths"][path]
    op = dict(item[method])
    op["parameters"] = item.get("parameters", []) + op.get("parameters", [])
    return op


@st.composite
def requests(draw, path: str, method: str, ids: list[str]):
    op = _operation(path, method)
    url = path
    query = {}
    for p in op["parameters"]:
        value = draw(_from_schema(p.get("schema", {}), ids, p["name"]))
        if p["in"] == "path":
            url = url.replace("{" + p["name"] + "}", quote(str(value), safe="") or "x")
        elif p["in"] == "query" and (p.get("required") or draw(st.booleans())):
            query[p["name"]] = str(value)
    if path == "/calc/{name}":
        from clinic.web.calcs import CALCULATORS

        names = sorted({i["name"] for c in CALCULATORS.values() for i in c["inputs"]})
        for n in draw(st.lists(st.sampled_from(names), max_size=6, unique=True)):
            query[n] = draw(st.sampled_from(["28+3", "30", "1500", "IM", "ug", "yes", "0", "-1", "1e9", "", "nan"])
                            | TEXT)
    # Parameters the document does not name are ignored, never a failure.
    for k, v in draw(st.dictionaries(st.text(string.ascii_letters + "_[]", min_size=1, max_size=8), TEXT,
                                     max_size=2)).items():
        query.setdefault(k, v)
    body = None
    if "requestBody" in op:
        schema = op["requestBody"]["content"]["application/json"]["schema"]
        body = draw(_from_schema(schema, ids) | _json_junk() | _near_valid(path, ids))
    who = draw(st.sampled_from(["clinician"] * 6 + ["midwife", "lab", "district-officer", "admin", None]))
    raw = draw(st.sampled_from([None] * 9 + [b"{not json", b"\xff\xfe", b""])) if body is not None else None
    return who, method.upper(), "/api/v1" + url + ("?" + urlencode(query) if query else ""), body, raw


@pytest.fixture(scope="module")
def scan_world(tmp_path_factory):
    world = make_world(tmp_path_factory.mktemp("scan"))
    clients = {who: Client(world.app, who) for who in ROLES}
    clients[None] = Client(world.app)
    return world, clients


def check(r, method, url) -> None:
    where = f"{method} {url} -> {r.status_code}"
    assert r.status_code < 500, where + " " + r.get_data(as_text=True)[:500]
    assert 200 <= r.status_code < 300 or 400 <= r.status_code < 500, where
    if url.split("?")[0].endswith("/openapi.yaml") and r.status_code == 200:
        return
    body = r.get_json(silent=True)
    assert isinstance(body, dict), f"{where}: not a JSON object"
    if r.status_code >= 400:
        msg = body.get("error") or body.get("errors")
        assert msg, f"{where}: a refusal without a message: {body}"


def _scan(path, method):
    n = QUOTA[(path, method)]

    @pytest.mark.slow
    def test(scan_world):
        world, clients = scan_world
        ids = [world.wid, world.pid] + [v for k, v in world.ids.items() if k not in ("woman", "pregnancy")]
        sent = []

        @settings(max_examples=n, deadline=None, derandomize=True, database=None,
                  suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
        @given(data=st.data())
        def scan(data):
            who, m, url, body, raw = data.draw(requests(path, method, ids))
            c = clients[who]
            headers = {"X-CSRF-Token": c.token}
            if raw is not None:
                r = c.c.open(url, method=m, data=raw, headers=headers, content_type="application/json")
            elif body is not None:
                r = c.c.open(url, method=m, data=json.dumps(body), headers=headers, content_type="application/json")
            else:
                r = c.c.open(url, method=m, headers=headers)
            try:
                check(r, m, url)
            finally:
                r.close()
            sent.append(r.status_code)

        scan()
        # Every example asked for was sent (Hypothesis stops early only on a small input space).
        assert len(sent) >= n, (path, method, len(sent))
        SENT[(path, method)] = len(sent)
        STATUSES[(path, method)] = set(sent)

    test.__name__ = f"test_scan_{method}_{path.strip('/').replace('/', '_').replace('{', '').replace('}', '')}"
    return test


for (_path, _method) in QUOTA:
    _t = _scan(_path, _method)
    globals()[_t.__name__] = _t


def test_the_scan_covers_every_operation_of_the_document_with_2000_requests():
    ops = {(p, m) for p, item in DOC["paths"].items() for m in item if m in ("get", "post", "patch", "put", "delete")}
    assert ops == set(QUOTA), "give every operation of openapi.yaml a quota"
    assert sum(QUOTA.values()) >= 2000


def test_the_scans_reach_past_the_guard_and_the_validation():
    """Run after the scans in the same process (skipped when pytest -n sent them elsewhere)."""
    if set(SENT) != set(QUOTA):
        pytest.skip("the scans ran in other processes (pytest -n); each one checks its own count")
    assert sum(SENT.values()) >= 2000
    assert {201, 401, 403, 422} <= STATUSES[("/records", "post")], STATUSES[("/records", "post")]
    assert {200, 404} <= STATUSES[("/records/{record_id}", "get")]
    assert {200, 422} <= STATUSES[("/calc/{name}", "get")]
    assert 422 in STATUSES[("/records/{record_id}", "patch")] and 422 in STATUSES[("/bookings", "post")]
