"""Every route and every API operation, with no session and as each role: exactly the allowed
ones succeed. The table below is written by hand from the issue's roles, independently of
clinic/accounts/roles.py; a route missing from it fails the test (it walks app.url_map).

"Succeeds" means the request got past the guard: not 401, not 403, not a redirect to sign-in
(it may still be a 4xx about the data sent, such as 422 for an empty form). "Refused" is 403
for a signed-in role, and 401 (API) or a redirect to sign-in (pages) without a session.
"""
from __future__ import annotations

import pytest

from clinic.accounts.roles import ROLES
from clinic.records.schema import ENTRY_KINDS, KINDS
from tests.security.world import PASSWORD, USERS, Client, example, make_world, new_id

CLINICAL = {"midwife", "nurse", "clinician"}
ALL = set(ROLES)
PUBLIC = "public"        # no session needed: everyone, anonymous included
READ = CLINICAL | {"lab"}
BOOK = CLINICAL
RESULTS = CLINICAL | {"lab"}
CARE = CLINICAL
SURVEILLANCE = {"clinician"}   # MCA Doppler, fetal blood sampling, intrauterine transfusion
STOCK_READ = CLINICAL | {"lab", "district-officer"}
STOCK_RECORD = CLINICAL | {"lab"}
CALC = CLINICAL | {"lab"}
CARD_READ = CLINICAL | {"lab"}
CARD_WRITE = CLINICAL
REPORT = CLINICAL | {"lab", "district-officer"}
FOLLOW_UP = CLINICAL | {"district-officer"}
BUNDLE_IMPORT = {"district-officer"}
BUNDLE_EXPORT = CLINICAL | {"district-officer", "admin"}
ADMIN = {"admin"}

KIND_ROLES = {"woman": BOOK, "pregnancy": BOOK, "typing": RESULTS, "partner_typing": RESULTS,
              "fetal_rhd": RESULTS, "screen": RESULTS, "fmh": RESULTS, "event": CARE, "dose": CARE,
              "birth": CARE, "referral": CARE, "doppler": SURVEILLANCE, "fbs": SURVEILLANCE,
              "iut": SURVEILLANCE, "stock": STOCK_RECORD}


class Case:
    """endpoint, method, url (may use {pid}, {wid}, {<kind>} for record ids), allowed roles."""

    def __init__(self, endpoint, method, url, allowed, *, form=None, json=None, ends_session=False,
                 changes_session=False):
        self.endpoint, self.method, self.url, self.allowed = endpoint, method, url, allowed
        self.form, self.json, self.ends_session = form, json, ends_session
        self.changes_session = changes_session  # run on a client of its own (signing in starts a session)

    def __repr__(self):
        return f"{self.method} {self.url}"


def _cases() -> list[Case]:
    c = [
        Case("auth.signin", "GET", "/signin", PUBLIC),
        Case("auth.signin", "POST", "/signin", PUBLIC, form={"username": "midwife", "password": PASSWORD},
             changes_session=True),
        Case("static", "GET", "/static/css/app.css", PUBLIC),
        Case("pages.service_worker", "GET", "/sw.js", PUBLIC),
        Case("pages.manifest", "GET", "/manifest.webmanifest", PUBLIC),
        Case("setup.phone", "GET", "/setup/", PUBLIC),
        Case("setup.ca_certificate", "GET", "/setup/ca.crt", PUBLIC),
        Case("setup.qr", "GET", "/setup/qr", PUBLIC),
        Case("setup.outbox", "GET", "/outbox", PUBLIC),
        Case("setup.offline", "GET", "/offline", PUBLIC),
        Case("setup.ping", "GET", "/net/ping", PUBLIC),
        Case("auth.password", "GET", "/account/password", ALL),
        Case("auth.password", "POST", "/account/password", ALL, form={"current": "wrong", "new": "x", "again": "y"}),
        Case("api.session_info", "GET", "/api/v1/session", ALL),
        Case("api.openapi", "GET", "/api/v1/openapi.yaml", ALL),
        # Today: a role that may not see names is sent on to its own start page (checked below).
        Case("pages.today", "GET", "/", ALL),
        Case("pages.find", "GET", "/find?q=Zuri", READ),
        Case("records.woman", "GET", "/women/{wid}", READ),
        Case("records.pregnancy", "GET", "/pregnancies/{pid}", READ),
        Case("records.booking", "GET", "/book", BOOK),
        Case("records.booking", "POST", "/book", BOOK, form={}),
        Case("records.stock", "GET", "/stock", STOCK_READ),
        Case("records.stock", "POST", "/stock", STOCK_RECORD, form={}),
        Case("tools.calculators", "GET", "/calc/", CALC),
        Case("tools.calculator", "GET", "/calc/mca", CALC),
        Case("api.bookings", "POST", "/api/v1/bookings", BOOK, json={}),
        Case("api.get_record", "GET", "/api/v1/records/{typing}", READ),
        Case("api.pregnancy", "GET", "/api/v1/pregnancies/{pid}", READ),
        Case("api.get_worklist", "GET", "/api/v1/worklist", READ),
        Case("api.women", "GET", "/api/v1/women?q=Zuri", READ),
        Case("api.calc", "GET", "/api/v1/calc/units?amount=300&unit=ug", CALC),
        Case("card.index", "GET", "/cards/", CARD_READ),
        Case("card.read", "POST", "/cards/read", CARD_READ, form={"code": "RHL1:NOTACARD"}),
        Case("card.photo", "POST", "/cards/photo", CARD_READ, form={}),
        Case("card.import_card", "POST", "/cards/import", CARD_WRITE, form={"code": "RHL1:NOTACARD"}),
        Case("card.pregnancy_card", "GET", "/cards/pregnancy/{pid}", CARD_WRITE),
        Case("card.issue_pregnancy_card", "POST", "/cards/pregnancy/{pid}", CARD_WRITE, form={}),
        Case("card.card_pdf", "GET", "/cards/pregnancy/{pid}/card.pdf", CARD_WRITE),
        Case("card.card_png", "GET", "/cards/pregnancy/{pid}/card.png", CARD_WRITE),
        Case("card.sheet_pdf", "GET", "/cards/pregnancy/{pid}/sheet.pdf", CARD_WRITE),
        Case("card.referral_pdf", "GET", "/cards/pregnancy/{pid}/referral.pdf", CARD_WRITE),
        Case("district.index", "GET", "/district/", REPORT),
        Case("district.download", "GET", "/district/report.csv", REPORT),
        Case("district.download", "GET", "/district/report.json", REPORT),
        # The downloads that carry names are follow-up lists.
        Case("district.download", "GET", "/district/report.follow-up", FOLLOW_UP),
        Case("district.download", "GET", "/district/report.fhir-records", FOLLOW_UP),
        Case("district.follow_up", "GET", "/district/follow-up", FOLLOW_UP),
        Case("district.import_page", "GET", "/district/import", BUNDLE_IMPORT),
        Case("district.import_post", "POST", "/district/import", BUNDLE_IMPORT, form={}),
        Case("district.import_one", "POST", "/district/import/file", BUNDLE_IMPORT, form={}),
        Case("district.export_page", "GET", "/district/export", BUNDLE_EXPORT),
        Case("district.export_post", "POST", "/district/export", BUNDLE_EXPORT, form={}),
        Case("supply.index", "GET", "/supply/", STOCK_READ),
        Case("supply.download", "GET", "/supply/forecast.csv", STOCK_READ),
        Case("supply.download", "GET", "/supply/forecast.json", STOCK_READ),
        Case("admin.users", "GET", "/admin/users", ADMIN),
        Case("admin.user_add", "POST", "/admin/users", ADMIN, form={"username": "Not Valid!", "role": "nurse"}),
        Case("admin.user_action", "POST", "/admin/users/nurse/unlock", ADMIN, form={}),
        Case("admin.audit", "GET", "/admin/audit", ADMIN),
    ]
    for kind in ENTRY_KINDS:
        c.append(Case("records.add_entry", "GET", f"/pregnancies/{{pid}}/add/{kind}", KIND_ROLES[kind]))
        c.append(Case("records.add_entry", "POST", f"/pregnancies/{{pid}}/add/{kind}", KIND_ROLES[kind], form={}))
    for kind in KINDS:
        c.append(Case("records.amend", "GET", f"/records/{{{kind}}}/amend", KIND_ROLES[kind]))
        c.append(Case("records.amend", "POST", f"/records/{{{kind}}}/amend", KIND_ROLES[kind], form={}))
        c.append(Case("records.void", "GET", f"/records/{{{kind}}}/void", KIND_ROLES[kind]))
        c.append(Case("records.void", "POST", f"/records/{{{kind}}}/void", KIND_ROLES[kind], form={"reason": ""}))
        c.append(Case("api.amend", "PATCH", f"/api/v1/records/{{{kind}}}", KIND_ROLES[kind], json={}))
        body = {"kind": kind, "fields": example(kind)}
        if KINDS[kind].parent == "pregnancy":
            body["pregnancy_id"] = "{pid}"
        elif KINDS[kind].parent == "woman":
            body["woman_id"] = "{wid}"
        c.append(Case("api.create", "POST", "/api/v1/records", KIND_ROLES[kind], json=body))
    # Last: they end the session.
    c.append(Case("auth.switch", "POST", "/switch", ALL, form={}, ends_session=True))
    c.append(Case("auth.signout", "POST", "/signout", ALL, form={}, ends_session=True))
    return c


CASES = _cases()


def _fill(value, world):
    if isinstance(value, str):
        return value.format(pid=world.pid, wid=world.wid, **world.ids)
    if isinstance(value, dict):
        return {k: _fill(v, world) for k, v in value.items()}
    return value


def _refused(r) -> bool:
    if r.status_code in (401, 403):
        return True
    loc = r.headers.get("Location", "")
    return r.status_code in (301, 302, 303) and "/signin" in loc and "next=" in loc


def _call(client, case: Case, world):
    json = _fill(case.json, world) if case.json is not None else None
    if json is not None and "fields" in json:
        json["id"] = new_id()  # a new record each time
    return client.open(case.method, _fill(case.url, world), form=_fill(case.form, world), json=json)


def test_every_route_of_the_app_is_in_this_table(tmp_path):
    world = make_world(tmp_path)
    listed = {(c.endpoint, c.method) for c in CASES}
    missing = []
    for rule in world.app.url_map.iter_rules():
        for m in sorted(rule.methods - {"HEAD", "OPTIONS"}):
            if (rule.endpoint, m) not in listed:
                missing.append(f"{m} {rule.rule} ({rule.endpoint})")
    assert not missing, "routes without a line in tests/security/test_role_table.py: " + ", ".join(missing)


def test_the_guard_lists_every_endpoint_and_only_those(tmp_path):
    from clinic.web.access import ENDPOINTS

    world = make_world(tmp_path)
    endpoints = {r.endpoint for r in world.app.url_map.iter_rules()}
    assert endpoints - set(ENDPOINTS) == set(), "add these to clinic/web/access.py ENDPOINTS"
    assert set(ENDPOINTS) - endpoints == set(), "clinic/web/access.py lists endpoints the app does not have"


@pytest.mark.parametrize("who", [None, *ROLES], ids=lambda w: w or "anonymous")
def test_exactly_the_allowed_roles_get_past_the_guard(tmp_path, who):
    world = make_world(tmp_path)
    client = Client(world.app, USERS[who] if who else None)
    wrong = []
    for case in CASES:
        if case.ends_session and who:
            client = Client(world.app, USERS[who])
        r = _call(Client(world.app, USERS[who] if who else None) if case.changes_session else client, case, world)
        allowed = case.allowed == PUBLIC or (who is not None and who in case.allowed)
        got_past = not _refused(r)
        if r.status_code >= 500:
            wrong.append(f"{case}: {r.status_code} (a failure, not a refusal)")
        elif allowed != got_past:
            wrong.append(f"{case}: {'refused' if allowed else 'allowed'} ({r.status_code} "
                         f"{r.headers.get('Location', '')}), expected {'allowed' if allowed else 'refused'}")
        elif not got_past and who is not None and r.status_code != 403:
            wrong.append(f"{case}: refused with {r.status_code}; a signed-in role is refused with 403")
        elif not got_past and who is None and case.url.startswith("/api/") and r.status_code != 401:
            wrong.append(f"{case}: {r.status_code}; the API answers 401 without a session")
    assert not wrong, f"as {who or 'anonymous'}:\n" + "\n".join(wrong)


@pytest.mark.parametrize("role,home", [("district-officer", "/district/"), ("admin", "/admin/users")])
def test_a_role_that_may_not_see_names_starts_on_its_own_page(tmp_path, role, home):
    world = make_world(tmp_path)
    r = Client(world.app, role).get("/")
    assert r.status_code == 302 and r.headers["Location"].endswith(home)


def test_anonymous_requests_get_nothing(tmp_path):
    """No page, record or API answer carries data without a session."""
    world = make_world(tmp_path)
    anon = Client(world.app)
    for case in CASES:
        if case.allowed == PUBLIC:
            continue
        r = _call(anon, case, world)
        body = r.get_data(as_text=True)
        # Her surname, phone and register number are in no URL of the table.
        assert not any(t in body for t in ("Invented-Testcase", "0700 000 999", "SEC-001")), case
        assert _refused(r), case
