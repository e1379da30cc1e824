"""In a real browser (Debian's Chromium through Playwright): the pages run under the strict CSP
without a single violation; signing out or switching staff drops every page the service worker
kept (they show women by name), while the outbox keeps its unsent entries and their author."""
from __future__ import annotations

import pytest

from tests.web.browser_fixtures import browser, context, demo_site, is_csp_violation, live, page, wait_for_worker  # noqa: F401

pytestmark = pytest.mark.browser


def sign_in_as(page, live, role: str) -> None:
    user, password, _r = next(a for a in live.summary["accounts"] if a[2] == role)
    page.goto("/signin")
    page.fill('input[name="username"]', user)
    page.fill('input[name="password"]', password)
    with page.expect_navigation():
        page.click('button[type="submit"]')
    assert "/signin" not in page.url, "sign-in failed"


def test_the_console_check_sees_a_csp_violation(browser, live):
    """The browser fixture fails a test on any CSP violation: make sure it would see one."""
    ctx = browser.new_context(base_url=live.url)
    try:
        seen = []
        pg = ctx.new_page()
        pg.on("console", lambda m: seen.append(m.text))
        pg.goto("/signin")
        pg.evaluate("""() => { document.body.insertAdjacentHTML('beforeend', '<div style="color:red">x</div>');
            const s = document.createElement('script'); s.textContent = 'window.ran = 1';
            document.body.appendChild(s); }""")
        pg.wait_for_timeout(300)
        assert pg.evaluate("window.ran === undefined"), "an inline script ran"
        assert any(is_csp_violation(t) for t in seen), seen
    finally:
        ctx.close()


def _pregnancy_with(live, kind: str) -> str:
    return next(r["pregnancy_id"] for r in live.store.iter_records(kind=kind) if not r.get("voided"))


def _sensitised(live) -> str:
    """An invented sensitised woman with titres and MCA Dopplers: the page draws both charts."""
    from datetime import datetime, timedelta, timezone

    s = live.app.extensions["rhledger"]["settings"]
    st, fid = live.store, s.facility_id
    now = datetime.now(timezone.utc)

    def ago(days):
        return (now - timedelta(days=days)).strftime("%Y-%m-%dT%H:%M:%SZ")

    w = st.create("woman", {"name": "Imani Invented-Charts", "stated_age": 31}, by="clinician", facility=fid).record
    p = st.create("pregnancy", {"booked_on": ago(120)[:10], "lmp": ago(200)[:10], "status": "ongoing",
                                "gravidity": 3, "parity": 2}, by="clinician", facility=fid, woman_id=w["id"]).record
    st.create("typing", {"abo": "O", "rhd": "negative", "tested_on": ago(119)[:10]}, by="lab", facility=fid,
              pregnancy_id=p["id"])
    for days, titre in ((100, 8), (60, 16), (20, 32)):
        st.create("screen", {"sampled_at": ago(days), "result": "positive", "antibodies": ["anti-D"], "titre": titre,
                             "titre_antibody": "anti-D", "anti_d_origin": "immune"}, by="lab", facility=fid,
                  pregnancy_id=p["id"])
    for days, psv in ((40, 30.0), (20, 38.0), (5, 45.0)):
        st.create("doppler", {"measured_at": ago(days), "mca_psv_cm_s": psv}, by="clinician", facility=fid,
                  pregnancy_id=p["id"])
    return p["id"]


def test_the_pages_run_under_the_csp(page, live):
    """Every kind of page, charts included; the `context` fixture fails on any violation."""
    sign_in_as(page, live, "clinician")
    with_charts = _sensitised(live)
    urls = ["/", "/find?q=a", f"/pregnancies/{with_charts}", f"/pregnancies/{with_charts}/add/dose",
            f"/pregnancies/{with_charts}/add/doppler", "/book", "/calc/", "/calc/mca?psv_cm_s=40&ga_days=28%2B0",
            "/stock", "/cards/", f"/cards/pregnancy/{with_charts}", "/district/", "/district/export",
            "/account/password", "/outbox", "/offline"]
    for url in urls:
        r = page.goto(url)
        assert r.status == 200, (url, r.status)
        assert r.headers.get("content-security-policy", "").startswith("default-src 'self'")
    page.goto(f"/pregnancies/{with_charts}")
    assert page.locator("svg.chart").count() == 2


def test_the_admin_pages_run_under_the_csp(page, live):
    sign_in_as(page, live, "admin")
    for url in ("/admin/users", "/admin/audit", "/admin/audit?by=midwife"):
        assert page.goto(url).status == 200


def _kept(page) -> int:
    return page.evaluate("""() => caches.keys().then(names => Promise.all(names
        .filter(n => n.indexOf('rhledger-pages') === 0).map(n => caches.open(n).then(c => c.keys()))))
        .then(lists => lists.reduce((a, l) => a + l.length, 0))""")


def _put_in_outbox(page, pid: str, user: str) -> str:
    return page.evaluate("""([pid, user]) => { const id = rhOutbox.uuid(); return rhOutbox.add({key: id,
        method: "POST", url: "/api/v1/records", body: {id: id, kind: "referral", pregnancy_id: pid,
        fields: {referred_on: new Date().toISOString().slice(0, 10), to_facility: "Invented hospital",
        reason: "kept at sign-out"}}, kind: "referral", label: "Referral", user: user, user_name: user,
        form_url: "/", form_values: []}, "waiting").then(() => id); }""", [pid, user])


@pytest.mark.parametrize("button", ["form.signout button", "form.switch button"], ids=["sign-out", "switch-staff"])
def test_signing_out_drops_the_kept_pages_and_keeps_the_outbox(page, context, live, button):
    pid = _pregnancy_with(live, "typing")
    sign_in_as(page, live, "midwife")
    page.goto(f"/pregnancies/{pid}")
    wait_for_worker(page)
    page.reload()
    page.wait_for_function("url => caches.match(url).then(Boolean)", arg=f"/pregnancies/{pid}", timeout=20000)
    assert _kept(page) >= 1
    # An entry another person saved on this phone: it waits for them, whoever signs out.
    rid = _put_in_outbox(page, pid, "another-midwife")
    with page.expect_navigation():
        page.click(button)
    assert "/signin" in page.url
    page.wait_for_function("""() => caches.keys().then(names => Promise.all(names
        .filter(n => n.indexOf('rhledger-pages') === 0).map(n => caches.open(n).then(c => c.keys()))))
        .then(lists => lists.every(l => l.length === 0))""", timeout=15000)
    assert page.evaluate("url => caches.match(url).then(r => r === undefined)", f"/pregnancies/{pid}")
    entries = page.evaluate("rhOutbox.list()")
    kept = [e for e in entries if e["key"] == rid]
    assert kept and kept[0]["user"] == "another-midwife", entries
    assert live.store.get(rid) is None   # never sent in the name of whoever was signed in


def test_a_page_left_open_ends_itself_after_the_idle_time(page, live):
    """session.js: no key, touch or click for idle-seconds -> the kept pages go, the sign-in page shows.
    (The idle time is shortened to 2 s for the test by rewriting the page's meta before it is read.)"""
    pid = _pregnancy_with(live, "typing")
    sign_in_as(page, live, "midwife")
    page.add_init_script("""document.addEventListener("DOMContentLoaded", () => {
        const m = document.querySelector('meta[name="idle-seconds"]'); if (m) m.setAttribute("content", "2"); });""")
    page.goto(f"/pregnancies/{pid}")
    page.wait_for_url("**/signin?ended=idle**", timeout=20000)
    assert f"next=%2Fpregnancies%2F{pid}" in page.url
