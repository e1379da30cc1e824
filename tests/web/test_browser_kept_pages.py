"""A page the phone kept before the outbox scripts were split into static/js/outbox/ names
net-queue.js and outbox.js, which are no longer served; opened without the laptop, the
service worker gives it their successors, so its form still saves to the outbox."""
from __future__ import annotations

from datetime import timedelta

import pytest

from tests.web.browser_fixtures import browser, context, demo_site, live, outbox_entries, page, sign_in, wait_for_worker  # noqa: F401
from tests.web.test_browser_flows import local_today, make_pregnancy

pytestmark = pytest.mark.browser

# What base.html loaded before the split.
OLD_SCRIPTS = '<script src="/static/js/net-queue.js"></script>\n<script src="/static/js/outbox.js"></script>\n'
KEPT_PAGES = """e => caches.open("rhledger-pages-v1")
    .then(c => Promise.all([c.keys(), c.match(e.url, {ignoreVary: true})]))
    .then(r => [r[0].length, !!r[1]])"""
# A page being kept again is briefly absent from the cache (keepPage deletes, then puts).
AS_KEPT_BEFORE = """e => caches.open("rhledger-pages-v1").then(c => c.match(e.url, {ignoreVary: true})
  .then(hit => !hit ? null : hit.text().then(html => {
    const now = html.replace(/(<script src="\\/static\\/js\\/outbox\\/[\\w-]+\\.js"><\\/script>\\n)+/, e.old);
    if (now === html) { return html.includes(e.old); }
    return c.put(e.url, new Response(now, {status: 200, headers: hit.headers})).then(() => true);
  })))"""
KEPT_AS_BEFORE = """e => caches.open("rhledger-pages-v1").then(c => c.match(e.url, {ignoreVary: true}))
    .then(hit => !hit ? false : hit.text())
    .then(html => !!html && html.includes(e.old) && !html.includes("/static/js/outbox/"))"""


def test_a_form_kept_before_the_split_still_saves_to_the_outbox_offline(page, context, live):
    p = make_pregnancy(live, "Akinyi Testcase Kept")
    form_path = f"/pregnancies/{p['id']}/add/screen"
    kept = {"url": live.url + form_path, "old": OLD_SCRIPTS}
    sign_in(page, live)
    page.goto(f"/pregnancies/{p['id']}")
    wait_for_worker(page)
    page.reload()
    # Until the worker has kept the form and stopped keeping pages (two looks alike, 0.5 s apart).
    looks = []
    for _ in range(60):
        looks.append(page.evaluate(KEPT_PAGES, kept))
        if len(looks) > 1 and looks[-1] == looks[-2] and looks[-1][1]:
            break
        page.wait_for_timeout(500)
    else:
        raise AssertionError(f"the worker did not keep {form_path}: {looks[-1]}")

    live.stop()
    context.set_offline(True)
    # Offline, nothing can be kept again over the old copy, except a keep already under way.
    for _ in range(10):
        assert page.evaluate(AS_KEPT_BEFORE, kept) is not False, "the kept page has no outbox scripts to put back"
        page.wait_for_timeout(500)
        if page.evaluate(KEPT_AS_BEFORE, kept):
            break
    else:
        raise AssertionError("the kept copy could not be made to look as it did before the split")
    page.goto(form_path)
    page.wait_for_selector("#offline-copy")
    assert page.evaluate("typeof rhl.forms.onSubmit") == "function"
    # The kept copy's time of sampling was cleared for the user to enter (outbox/kept.js).
    page.wait_for_selector('[name="sampled_at"] ~ .offline-note, .field:has([name="sampled_at"]) .offline-note')
    page.fill('[name="sampled_at"]', (local_today(live) - timedelta(hours=1)).strftime("%Y-%m-%dT%H:%M"))
    page.select_option('[name="result"]', "negative")
    page.fill('[name="lab"]', "Kept page lab")
    page.click('form[data-api] button[type="submit"]')
    page.locator('.outbox-status[data-outcome="queued"]').wait_for()
    [entry] = outbox_entries(page)
    assert entry["status"] == "waiting" and entry["body"]["fields"]["lab"] == "Kept page lab"
