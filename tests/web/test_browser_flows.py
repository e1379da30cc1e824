"""The clinic's main flows in a real browser at phone width, online and with the laptop gone.

Acceptance tests of the offline-first issue: sign in; register a booking and see the plan;
record a sensitising event and see the 72-hour deadline on Today; record the dose and see
the item done; save an entry while the laptop cannot be reached, reload, still see the
app and the waiting entry, come back and find exactly one copy on the laptop; a record
amended on the laptop meanwhile is shown as a conflict, never overwritten.
"""
from __future__ import annotations

from datetime import datetime, timedelta

import pytest

from tests.web.browser_fixtures import (  # noqa: F401
    browser,
    context,
    demo_site,
    live,
    outbox_entries,
    page,
    shot,
    sign_in,
    wait_for_worker,
)

pytestmark = pytest.mark.browser


def local_today(live) -> datetime:
    return datetime.now(live.app.extensions["rhledger"]["settings"].tz)


def make_pregnancy(live, name: str, weeks: int = 26) -> dict:
    """A woman typed RhD negative, booked ``weeks`` ago by LMP, made through the store."""
    s = live.app.extensions["rhledger"]["settings"]
    store = live.store
    today = local_today(live).date()
    w = store.create("woman", {"name": name, "stated_age": 29, "village": "Testville"}, by="midwife",
                     facility=s.facility_id).record
    p = store.create("pregnancy", {"booked_on": (today - timedelta(weeks=weeks - 12)).isoformat(),
                                   "lmp": (today - timedelta(weeks=weeks)).isoformat(), "status": "ongoing",
                                   "gravidity": 2, "parity": 1},
                     by="midwife", facility=s.facility_id, woman_id=w["id"]).record
    tested_on = (today - timedelta(weeks=weeks - 12)).isoformat()
    store.create("typing", {"abo": "A", "rhd": "negative", "tested_on": tested_on},
                 by="midwife", facility=s.facility_id, woman_id=w["id"], pregnancy_id=p["id"])
    return p


def kinds_of(live, pregnancy_id: str, kind: str) -> list[dict]:
    return [e for e in live.store.entries(pregnancy_id) if e.get("kind") == kind]


def test_sign_in_and_register_a_booking_shows_the_plan(page, live):
    page.goto("/signin")
    shot(page, "01-sign-in")
    sign_in(page, live)
    shot(page, "02-today")
    page.goto("/book")
    today = local_today(live).date()
    page.fill('[name="woman.name"]', "Wanjiru Testcase Oloo")
    page.fill('[name="woman.stated_age"]', "31")
    page.fill('[name="woman.village"]', "Kisima Test")
    page.fill('[name="woman.phone"]', "+000 700 111 222")
    page.fill('[name="pregnancy.lmp"]', (today - timedelta(weeks=20)).isoformat())
    page.fill('[name="pregnancy.gravidity"]', "2")
    page.fill('[name="pregnancy.parity"]', "1")
    page.select_option('[name="typing.abo"]', "O")
    page.select_option('[name="typing.rhd"]', "negative")
    page.fill('[name="typing.tested_on"]', today.isoformat())
    shot(page, "03-booking-form")
    page.click('form[data-api] button[type="submit"]')
    dup = page.locator('.outbox-status[data-outcome="duplicates"]')
    page.wait_for_url("**/pregnancies/**", timeout=15000) if not dup.is_visible() else None
    if "/pregnancies/" not in page.url:  # a similar demo woman: confirm and save again, as a user would
        page.check('[name="confirm_not_duplicate"]')
        with page.expect_navigation(url="**/pregnancies/**"):
            page.click('form[data-api] button[type="submit"]')
    plan = page.locator("section.plan")
    assert "Routine antenatal anti-D" in plan.inner_text()
    assert "Wanjiru Testcase Oloo" in page.inner_text("h1")
    shot(page, "04-pregnancy-plan")
    pid = page.url.split("/pregnancies/")[1].split("#")[0].split("?")[0]
    assert live.store.get(pid)["kind"] == "pregnancy"
    assert len(kinds_of(live, pid, "typing")) == 1


def test_sensitising_event_puts_the_72_hour_deadline_on_today_and_the_dose_closes_it(page, live):
    p = make_pregnancy(live, "Akinyi Testcase Event")
    sign_in(page, live)
    page.goto(f"/pregnancies/{p['id']}")
    page.click('.add-grid a:has-text("Sensitising event")')
    page.wait_for_url(f"**/pregnancies/{p['id']}/add/event")
    page.select_option('[name="event_kind"]', "abdominal-trauma")
    shot(page, "05-event-form")
    with page.expect_navigation(url=f"**/pregnancies/{p['id']}**"):
        page.click('form[data-api] button[type="submit"]')
    [event] = kinds_of(live, p["id"], "event")

    page.goto("/")
    item = page.locator("ul.worklist li.item", has_text="Akinyi Testcase Event").filter(
        has_text="Anti-D after abdominal trauma")
    assert item.count() == 1
    deadline = item.locator(".deadline").inner_text()
    assert "Give anti-D before" in deadline
    assert "in 2 d 23 h" in deadline or "in 3 d" in deadline, deadline  # 72 h from the event
    item.scroll_into_view_if_needed()
    shot(page, "06-today-event-deadline")

    page.goto(f"/pregnancies/{p['id']}")
    # The event's dose item links with the proposed dose (dose_iu=...), the FMH item without.
    page.locator(f'section.plan a[href*="covers={event["id"]}"]:not([href*="dose_iu=&"])',
                 has_text="Record this dose").click()
    page.wait_for_url("**/add/dose**")
    if not page.input_value('[name="lot"]'):
        page.fill('[name="lot"]', "TESTLOT-7")
    if not page.input_value('[name="lot_expiry"]'):
        page.fill('[name="lot_expiry"]', (local_today(live).date() + timedelta(days=300)).isoformat())
    if not page.input_value('[name="given_by"]'):
        page.fill('[name="given_by"]', "Midwife on duty")
    shot(page, "07-dose-form")
    with page.expect_navigation(url=f"**/pregnancies/{p['id']}**"):
        page.click('form[data-api] button[type="submit"]')
    doses = kinds_of(live, p["id"], "dose")
    assert len(doses) == 1
    done = page.locator("details.done-items li.item", has_text="Anti-D after abdominal trauma")
    assert done.count() == 1
    assert "state-done" in done.get_attribute("class")
    assert "done" in done.locator(".badge").text_content()
    page.locator("details.done-items summary").click()
    shot(page, "08-pregnancy-dose-done")


def test_an_entry_saved_offline_waits_on_the_phone_and_reaches_the_laptop_once(page, context, live):
    p = make_pregnancy(live, "Chebet Testcase Offline")
    form_path = f"/pregnancies/{p['id']}/add/screen"
    sign_in(page, live)
    page.goto(f"/pregnancies/{p['id']}")
    wait_for_worker(page)
    # Once the worker controls the page, it keeps what is opened and the entry forms linked from it.
    page.reload()
    page.wait_for_function("url => caches.match(url).then(Boolean)", arg=form_path, timeout=20000)
    page.goto(form_path)
    before = len(kinds_of(live, p["id"], "screen"))

    live.stop()
    context.set_offline(True)
    page.select_option('[name="result"]', "negative")
    page.fill('[name="lab"]', "Offline test lab")
    page.click('form[data-api] button[type="submit"]')
    status = page.locator('.outbox-status[data-outcome="queued"]')
    status.wait_for()
    assert "Saved on this phone – waiting for the laptop" in status.inner_text()
    page.wait_for_selector('#outbox-count[data-waiting="1"]')
    assert page.get_attribute("#net-state", "data-state") == "offline"
    shot(page, "09-entry-saved-on-phone")
    [entry] = outbox_entries(page)
    record_id = entry["body"]["id"]
    assert entry["key"] == record_id and entry["status"] == "waiting"

    page.reload()  # no laptop: the phone's copy of the page, the waiting entry still counted
    page.wait_for_selector("#offline-copy")
    page.wait_for_selector('#outbox-count[data-waiting="1"]')
    assert page.locator("form[data-api]").is_visible()
    shot(page, "10-reload-offline")
    page.goto("/outbox")
    card = page.locator(f'.outbox-entry[data-key="{record_id}"]')
    card.wait_for()
    assert "Waiting for the laptop" in card.inner_text() and "Offline test lab" in card.inner_text()
    shot(page, "11-outbox-waiting")
    assert live.store.get(record_id) is None

    live.start()
    context.set_offline(False)
    page.wait_for_selector('#outbox-count[data-count="0"]', timeout=30000)
    page.wait_for_selector(".outbox-empty")
    assert live.store.get(record_id)["lab"] == "Offline test lab"
    assert len(kinds_of(live, p["id"], "screen")) == before + 1
    shot(page, "12-outbox-sent")

    # A second delivery of the same entry (a lost answer, another tab) is the same record.
    # (This /outbox page is the phone's copy: the session's token is the one the outbox keeps.)
    again = page.evaluate("""e => rhOutbox.metaGet("csrf").then(token => fetch(e.url, {method: "POST",
        credentials: "same-origin", headers: {"Content-Type": "application/json", "X-CSRF-Token": token},
        body: JSON.stringify(e.body)})).then(r => r.json().then(j => [r.status, j.replay]))""", entry)
    assert again == [200, True]
    assert len([e for e in kinds_of(live, p["id"], "screen") if e["id"] == record_id]) == 1
    assert len(kinds_of(live, p["id"], "screen")) == before + 1


def test_a_record_amended_on_the_laptop_meanwhile_is_a_conflict_not_overwritten(page, context, live):
    p = make_pregnancy(live, "Njeri Testcase Conflict")
    s = live.app.extensions["rhledger"]["settings"]
    sampled = (datetime.now(s.tz) - timedelta(days=2)).strftime("%Y-%m-%dT%H:%M")
    rec = live.store.create("screen", {"sampled_at": sampled, "result": "negative", "lab": "First lab"},
                            by="midwife", facility=s.facility_id, woman_id=p["woman_id"], pregnancy_id=p["id"]).record
    sign_in(page, live)
    page.goto(f"/records/{rec['id']}/amend")
    wait_for_worker(page)
    page.reload()
    patch_form = page.locator('form[data-method="PATCH"]')

    live.stop()
    context.set_offline(True)
    if patch_form.count():
        page.fill('[name="lab"]', "Lab typed on the phone")
        page.fill('[name="reason"]', "wrong lab name")
        patch_form.locator('button[type="submit"]').click()
        page.locator('.outbox-status[data-outcome="queued"]').wait_for()
    else:
        # The amend page has no data-api form yet: queue the same request the form would make.
        page.evaluate("""rec => rhOutbox.add({key: rhOutbox.uuid(), method: "PATCH", url: "/api/v1/records/" + rec.id,
            body: {changes: {lab: "Lab typed on the phone"}, reason: "wrong lab name", expected_version: rec.version},
            kind: "screen", label: "Amend antibody screen", record_id: rec.id,
            form_url: "/records/" + rec.id + "/amend",
            form_values: [["lab", "Lab typed on the phone"], ["reason", "wrong lab name"]]}, "waiting")""", rec)
    page.wait_for_selector('#outbox-count[data-waiting="1"]')

    # Meanwhile, on the laptop, someone corrects the same record.
    live.store.amend(rec["id"], {"lab": "Lab corrected on the laptop"}, by="clinician", reason="lab renamed",
                     expected_version=1)

    live.start()
    context.set_offline(False)
    page.goto("/outbox")
    card = page.locator('.outbox-entry[data-status="conflict"]')
    card.wait_for(timeout=30000)
    text = card.inner_text()
    assert "Conflict" in text and "version 2" in text
    assert "Lab corrected on the laptop" in text and "Lab typed on the phone" in text
    page.wait_for_selector('#outbox-count[data-attention="1"]')
    shot(page, "13-outbox-conflict")
    current = live.store.get(rec["id"])
    assert current["lab"] == "Lab corrected on the laptop" and current["version"] == 2

    page.once("dialog", lambda d: d.accept())
    card.locator('button[data-act="discard"]').click()
    page.wait_for_selector('#outbox-count[data-count="0"]')
    assert live.store.get(rec["id"])["version"] == 2


def test_phone_setup_pages(page, live):
    from clinic.web import lan

    lan.ensure_certificates(live.app.config["DATA_DIR"], ["192.168.8.20"])
    live.app.config.update(LAN_HTTPS_PORT=5080, LAN_SETUP_PORT=5081)
    try:
        page.goto("/setup/")
        assert "Install a certificate" in page.inner_text("main")
        shot(page, "14-phone-setup")
        page.goto("/setup/qr")
        assert page.locator(".qr-code svg").count() >= 1
        shot(page, "15-setup-qr")
    finally:
        live.app.config.update(LAN_HTTPS_PORT=None, LAN_SETUP_PORT=None)


def test_refused_values_are_shown_by_their_fields_and_nothing_is_queued(page, live):
    p = make_pregnancy(live, "Atieno Testcase Refused")
    sign_in(page, live)
    page.goto(f"/pregnancies/{p['id']}/add/event")
    page.select_option('[name="event_kind"]', "antepartum-haemorrhage")
    page.fill('[name="ga_days"]', "50+0")
    page.click('form[data-api] button[type="submit"]')
    err = page.locator('[data-error-for="ga_days"]')
    err.wait_for()
    assert "44+0" in err.inner_text()
    assert page.locator('.outbox-status[data-outcome="rejected"]').is_visible()
    assert page.input_value('[name="ga_days"]') == "50+0"  # what was typed stays
    shot(page, "16-refused-values")
    assert kinds_of(live, p["id"], "event") == []
    assert outbox_entries(page) == []


def test_an_amendment_made_online_is_saved_at_once(page, live):
    p = make_pregnancy(live, "Wambui Testcase Amend")
    s = live.app.extensions["rhledger"]["settings"]
    sampled = (datetime.now(s.tz) - timedelta(days=1)).strftime("%Y-%m-%dT%H:%M")
    rec = live.store.create("screen", {"sampled_at": sampled, "result": "negative", "lab": "Old lab"},
                            by="midwife", facility=s.facility_id, woman_id=p["woman_id"], pregnancy_id=p["id"]).record
    sign_in(page, live)
    page.goto(f"/records/{rec['id']}/amend")
    page.fill('[name="lab"]', "District lab")
    page.fill('[name="reason"]', "lab name was wrong")
    with page.expect_navigation(url=f"**/pregnancies/{p['id']}**"):
        page.click('form[data-method="PATCH"] button[type="submit"]')
    now = live.store.get(rec["id"])
    assert now["version"] == 2 and now["lab"] == "District lab"
    assert list(now["amendments"][-1]["changes"]) == ["lab"]  # only what was changed is sent


def test_a_booking_made_offline_reaches_the_laptop_once(page, context, live):
    sign_in(page, live)
    page.goto("/book")
    wait_for_worker(page)
    page.reload()
    page.wait_for_function("url => caches.match(url).then(Boolean)", arg=live.url + "/book")

    live.stop()
    context.set_offline(True)
    page.reload()
    page.wait_for_selector("#offline-copy")
    today = local_today(live).date()
    page.fill('[name="woman.name"]', "Moraa Testcase Offlinebook")
    page.fill('[name="woman.stated_age"]', "24")
    page.fill('[name="pregnancy.lmp"]', (today - timedelta(weeks=14)).isoformat())
    page.select_option('[name="typing.abo"]', "B")
    page.select_option('[name="typing.rhd"]', "negative")
    page.fill('[name="typing.tested_on"]', today.isoformat())
    page.click('form[data-api] button[type="submit"]')
    page.locator('.outbox-status[data-outcome="queued"]').wait_for()
    [entry] = outbox_entries(page)
    body = entry["body"]
    assert entry["key"] == body["pregnancy"]["id"]
    assert body["woman"]["fields"]["name"] == "Moraa Testcase Offlinebook"
    assert body["typing"]["fields"]["rhd"] == "negative" and "screen" not in body  # empty parts stay out
    shot(page, "17-booking-saved-on-phone")

    live.start()
    context.set_offline(False)
    page.wait_for_selector('#outbox-count[data-count="0"]', timeout=30000)
    preg = live.store.get(body["pregnancy"]["id"])
    assert preg["woman_id"] == body["woman"]["id"]
    same = [w["id"] for w in live.store.women_of() if w.get("name") == "Moraa Testcase Offlinebook"]
    assert same == [body["woman"]["id"]]
    assert len(kinds_of(live, preg["id"], "typing")) == 1


def test_an_entry_waits_for_the_user_who_saved_it(page, live):
    p = make_pregnancy(live, "Kemunto Testcase Author")
    sign_in(page, live)
    page.goto("/outbox")
    rid = page.evaluate("""pid => { const id = rhOutbox.uuid(); return rhOutbox.add({key: id, method: "POST",
        url: "/api/v1/records", body: {id: id, kind: "referral", pregnancy_id: pid,
        fields: {referred_on: new Date().toISOString().slice(0, 10), to_facility: "County hospital", reason: "test"}},
        kind: "referral", label: "Referral", user: "someone-else", user_name: "Another Midwife",
        form_url: "/", form_values: []}, "waiting").then(() => id); }""", p["id"])
    page.evaluate("rhForms.sendOutbox('test')")
    card = page.locator(f'.outbox-entry[data-key="{rid}"][data-status="signin"]')
    card.wait_for()
    assert "Another Midwife must sign in here to send it" in card.inner_text()
    assert live.store.get(rid) is None


def test_a_refused_outbox_entry_is_reopened_corrected_and_sent(page, live):
    p = make_pregnancy(live, "Nafula Testcase Reopen")
    sign_in(page, live)
    form_path = f"/pregnancies/{p['id']}/add/event"
    page.goto(form_path)
    # As if saved offline earlier: a value the laptop refuses.
    rid = page.evaluate("""a => { const id = rhOutbox.uuid(); return rhOutbox.add({key: id, method: "POST",
        url: "/api/v1/records", body: {id: id, kind: "event", pregnancy_id: a.pid,
          fields: {event_kind: "abdominal-trauma", occurred_at: a.when, ga_days: "50+0"}},
        kind: "event", label: "Sensitising event", form_url: a.path,
        form_values: [["id", id], ["event_kind", "abdominal-trauma"], ["occurred_at", a.when], ["ga_days", "50+0"]]},
        "waiting").then(() => id); }""",
                        {"pid": p["id"], "path": form_path,
                         "when": (local_today(live) - timedelta(hours=2)).strftime("%Y-%m-%dT%H:%M")})
    page.goto("/outbox")
    card = page.locator(f'.outbox-entry[data-key="{rid}"][data-status="rejected"]')
    card.wait_for(timeout=30000)
    assert "44+0" in card.inner_text()
    card.locator('button[data-act="reopen"]').click()
    page.wait_for_url(f"**{form_path}#outbox={rid}")
    page.locator('[data-error-for="ga_days"]:not([hidden])').wait_for()
    assert page.input_value('[name="ga_days"]') == "50+0"
    assert page.input_value('[name="event_kind"]') == "abdominal-trauma"
    shot(page, "18-reopened-from-outbox")
    page.fill('[name="ga_days"]', "")
    with page.expect_navigation(url=f"**/pregnancies/{p['id']}**"):
        page.click('form[data-api] button[type="submit"]')
    assert live.store.get(rid)["event_kind"] == "abdominal-trauma"  # the same id: one record
    assert outbox_entries(page) == []


def test_the_app_is_installable(page, context, live):
    sign_in(page, live)
    wait_for_worker(page)
    page.reload()
    cdp = context.new_cdp_session(page)
    manifest = cdp.send("Page.getAppManifest")
    assert manifest["errors"] == [], manifest["errors"]
    errors = cdp.send("Page.getInstallabilityErrors")["installabilityErrors"]
    # A Playwright context is an incognito profile, where nothing can be installed; all else must pass.
    assert [e for e in errors if e["errorId"] != "in-incognito"] == [], errors


def test_main_nav_and_stock_fit_a_phone(page, live):
    """At 360 px every main-nav section is on screen (the nav wraps), and no page is wider than the phone."""
    sign_in(page, live)
    for path in ("/", "/stock", "/calc/fmh?fetal_cell_percent=0.2"):
        page.goto(path)
        assert page.evaluate("document.documentElement.scrollWidth") <= 360, path
        boxes = page.eval_on_selector_all(".mainnav a", "els => els.map(e => e.getBoundingClientRect().right)")
        assert boxes and max(boxes) <= 360, (path, boxes)
