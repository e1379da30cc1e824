"""No stack trace ever reaches a user: a failure is logged with a reference number, and the
person sees a plain message and that reference (page or API)."""
from __future__ import annotations

import json
import re

import pytest

from tests.security.world import Client, make_data_dir

SECRET_DETAIL = "invented failure detail 7f3a"


@pytest.fixture
def failing(tmp_path, monkeypatch):
    from clinic.web import create_app, worklist

    d = make_data_dir(tmp_path)
    app = create_app(d)  # not TESTING: the app answers failures itself

    def fail(*a, **kw):
        raise RuntimeError(SECRET_DETAIL)

    monkeypatch.setattr(worklist, "build", fail)
    return app, d


def _logged(d) -> list[dict]:
    return [json.loads(line) for line in (d / "logs" / "errors.log").read_text().splitlines()]


def test_a_failing_page_shows_a_reference_and_no_trace(failing):
    app, d = failing
    r = Client(app, "midwife").get("/")
    html = r.get_data(as_text=True)
    assert r.status_code == 500
    assert "Traceback" not in html and SECRET_DETAIL not in html and "RuntimeError" not in html
    ref = re.search(r"data-reference>([A-Z0-9]{4}-[A-Z0-9]{4})<", html).group(1)
    (line,) = _logged(d)
    assert line["reference"] == ref and line["path"] == "/" and line["endpoint"] == "pages.today"
    assert SECRET_DETAIL in line["traceback"] and "Traceback" in line["traceback"]


def test_a_failing_api_call_answers_json_with_the_reference(failing):
    app, d = failing
    r = Client(app, "midwife").get("/api/v1/worklist")
    assert r.status_code == 500
    body = r.get_json()
    assert set(body) == {"error", "reference"} and SECRET_DETAIL not in json.dumps(body)
    assert _logged(d)[-1]["reference"] == body["reference"]


def test_the_headers_are_on_a_failure_too(failing):
    app, _d = failing
    r = Client(app, "midwife").get("/")
    assert "script-src 'self'" in r.headers["Content-Security-Policy"] and r.headers["Cache-Control"] == "no-store"


@pytest.mark.parametrize("url", ["/nowhere", "/api/v1/nowhere", "/pregnancies/%00", "/static/../config.toml"])
def test_unknown_addresses_answer_plainly(failing, url):
    app, _d = failing
    r = Client(app, "midwife").get(url)
    assert r.status_code == 404
    body = r.get_data(as_text=True)
    assert "Traceback" not in body and "werkzeug" not in body.lower()


def test_the_references_differ():
    from clinic.web.errors import new_reference

    refs = {new_reference() for _ in range(200)}
    assert len(refs) == 200 and all(re.fullmatch(r"[A-Z2-9]{4}-[A-Z2-9]{4}", r) for r in refs)
