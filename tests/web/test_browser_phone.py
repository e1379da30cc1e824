"""On a 360 px phone, in Debian's Chromium: Today takes one glance, the main menu never covers
the page, every tap target is at least 44 px, and the district coverage page opens with its
summary. Screenshots of Today and the district summary go to test-artifacts/screenshots/ (the
card reader's are taken by tests/card/test_camera_reading.py, with its fake camera)."""
from __future__ import annotations

import pytest

from clinic.web import triage, worklist
from clinic.web.helpers import field_of
from tests.web.browser_fixtures import (  # noqa: F401
    CHROMIUM_ARGS,
    PHONE,
    SHOTS,
    TIMEOUT_MS,
    LiveServer,
    browser,
    context,
    demo_site,
    free_port,
    live,
    page,
    shot,
    sign_in,
)

pytestmark = pytest.mark.browser
SCREEN = PHONE["height"]
FEW_SCREENS = 3

# Links, buttons, summaries and form controls smaller than 44 x 44 CSS px, with every <details>
# opened first. A checkbox or radio counts as the label it sits in (the label takes the tap).
SMALL_TARGETS = """() => {
  for (const d of document.querySelectorAll("details")) { d.open = true; }
  const small = [];
  const targets = "a[href], button, summary, select, textarea, input:not([type=hidden]), label.check";
  for (let e of document.querySelectorAll(targets)) {
    if (e.matches("input[type=checkbox], input[type=radio]") && e.closest("label")) { e = e.closest("label"); }
    const r = e.getBoundingClientRect();
    if (!r.width || !r.height || getComputedStyle(e).visibility === "hidden") { continue; }
    if (r.width < 44 || r.height < 44) {
      small.push(`${e.tagName.toLowerCase()} "${(e.textContent || e.name || "").trim().slice(0, 40)}" ` +
                 `${Math.round(r.width)}x${Math.round(r.height)}`);
    }
  }
  return small;
}"""


def _box(locator) -> dict:
    box = locator.bounding_box()
    assert box is not None, f"{locator} is not on the page"
    return box


def _line(page, row):
    name, what = row["woman"]["name"], triage.short_title(field_of(row["item"], "title"))
    return page.locator("#tier-now li.line", has_text=name).filter(has_text=what).first


def test_today_puts_what_cannot_wait_on_the_first_screen_and_fits_a_few_screens(page, live):
    with live.app.app_context():
        wl = worklist.build("all")
        tiers = triage.triage(wl["rows"], wl["now"])
    assert tiers and tiers[0].key == "now", "the demo clinic has something that cannot wait"
    sign_in(page, live)
    page.goto("/")
    assert page.evaluate("scrollY") == 0
    # The most urgent by the worklist (overdue, its late window closing first) and the first of
    # "Cannot wait" (the least time left to act) are both on the first screen.
    for row in (wl["rows"][0], tiers[0].groups[0].rows[0]):
        box = _box(_line(page, row))
        assert box["y"] >= 0 and box["y"] + box["height"] <= SCREEN, (row["woman"]["name"], box)
    # So is every group of "Cannot wait", open or folded with its count.
    for g in tiers[0].groups:
        summary = page.locator(f"#{g.key} > summary")
        assert summary.inner_text().strip().endswith(str(g.count))
        box = _box(summary)
        assert box["y"] + box["height"] <= SCREEN, (g.key, box)
    # The rest is folded: only the anti-D of "Cannot wait" and the danger alerts are open.
    opened = page.eval_on_selector_all("details.group[open]", "els => els.map(e => e.id)")
    assert set(opened) <= {"now-anti-d", "alerts-danger"} and "now-anti-d" in opened
    height = page.evaluate("document.documentElement.scrollHeight")
    assert height <= FEW_SCREENS * SCREEN, f"Today is {height} px tall at 360 px, more than {FEW_SCREENS} screens"
    assert page.evaluate("document.documentElement.scrollWidth") <= PHONE["width"]
    shot(page, "today-360")

    # One line per item; the detail and the entry to make are one tap away.
    first = _line(page, tiers[0].groups[0].rows[0])
    assert first.locator(".item-detail").is_hidden()
    first.locator("summary").click()
    detail = first.locator(".item-detail")
    assert detail.is_visible()
    assert detail.locator("a", has_text="Open her record").is_visible()
    assert "Proposed:" in detail.inner_text()
    # A folded group opens with one tap.
    folded = page.locator("#" + page.get_attribute("details.group:not([open])", "id"))
    folded.locator("> summary").click()
    assert folded.locator("li.line").first.is_visible()

    # The filters stay at hand at the bottom of the page, and work.
    page.evaluate("window.scrollTo(0, document.documentElement.scrollHeight)")
    box = _box(page.locator(".filters"))
    assert 0 <= box["y"] <= 5 and box["y"] + box["height"] <= 80, box
    with page.expect_navigation(url="**/?filter=events"):
        page.click('.filters a[href="/?filter=events"]')
    assert "Give anti-D before" in page.inner_text("#tier-now")


def _covered(page, selector: str) -> str | None:
    """What sits on top of the middle of the element (None when the element itself is there)."""
    return page.evaluate("""sel => {
        const e = document.querySelector(sel);
        e.scrollIntoView({block: "start"});
        const r = e.getBoundingClientRect();
        const top = document.elementFromPoint(r.left + r.width / 2, r.top + Math.min(r.height / 2, 10));
        return top && (top === e || e.contains(top)) ? null : (top ? top.outerHTML.slice(0, 80) : "nothing");
    }""", selector)


def test_the_main_menu_never_covers_the_page(page, live):
    sign_in(page, live)
    page.goto("/cards/")
    position = page.eval_on_selector(".mainnav", "e => getComputedStyle(e).position")
    assert position not in ("sticky", "fixed"), position
    # Each section of the card reader, scrolled to the top of the screen, is not under the menu.
    for section in ("main h1", "main section:nth-of-type(1) h2", "#camera h2", "main section:nth-of-type(3) h2"):
        assert _covered(page, section) is None, (section, _covered(page, section))
    page.goto("/")
    page.evaluate("window.scrollTo(0, 600)")
    on_top = page.evaluate("document.elementFromPoint(180, 60).closest('.mainnav, .topbar') === null")
    assert on_top, "the main menu floats over Today"


def test_every_tap_target_is_at_least_44_px(page, live):
    pid = next(p["id"] for p in live.store.pregnancies() if p.get("status") == "delivered")
    sign_in(page, live)
    problems = {}
    for path in ("/", "/?filter=tests", "/cards/", "/find?q=a", "/find?q=nobody-by-this-name", f"/pregnancies/{pid}",
                 f"/cards/pregnancy/{pid}", "/stock", "/supply/", "/book", "/calc/", "/calc/fmh", "/outbox",
                 "/district/export"):
        page.goto(path)
        small = page.evaluate(SMALL_TARGETS)
        if small:
            problems[path] = small[:5]
    assert problems == {}, problems


@pytest.fixture(scope="module")
def district_live(tmp_path_factory):
    """The demo district office with the clinics' bundles imported, served on its own port."""
    from clinic.reports.bundle import import_bundle
    from clinic.store import Store
    from clinic.web import create_app
    from seed_demo.scenario import build_site

    d = tmp_path_factory.mktemp("district-demo") / "district"
    summary = build_site(d, "district")
    store = Store(d)
    for b in summary["bundles"]:
        with open(b["file"], "rb") as fh:
            res = import_bundle(store, d, fh.read(), name=b["file"].rsplit("/", 1)[-1])
        assert res.to_dict()["status"] == "imported", res.to_dict()
    server = LiveServer(create_app(d), free_port())
    server.start()
    server.credentials = next((u, pw) for u, pw, role in summary["accounts"] if role == "district-officer")
    yield server
    server.stop()


@pytest.mark.slow
def test_the_district_coverage_page_opens_with_its_summary(browser, district_live):
    ctx = browser.new_context(viewport=PHONE, base_url=district_live.url, locale="en-GB")
    ctx.set_default_timeout(TIMEOUT_MS)
    try:
        page = ctx.new_page()
        sign_in(page, district_live)
        page.goto("/district/")
        summary = page.locator("#summary")
        chart = summary.locator("svg.summary-chart")
        assert chart.count() == 1
        box, table = _box(summary), _box(page.locator("table.cov").first)
        assert box["y"] < SCREEN and box["y"] + box["height"] < table["y"], (box, table)
        chart_box = _box(chart)
        assert chart_box["y"] + chart_box["height"] <= SCREEN, chart_box  # the chart is on the first screen
        text = chart.inner_html()
        for name in ("Ambeni", "Rusoka", "Pellow", "District"):
            assert name in text
        assert "style=" not in summary.inner_html()
        SHOTS.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(SHOTS / "district-summary-360.png"))
        summary.screenshot(path=str(SHOTS / "district-summary-chart-360.png"))
        assert page.evaluate("document.documentElement.scrollWidth") <= PHONE["width"]
        small = page.evaluate(SMALL_TARGETS)
        assert small == [], small
    finally:
        ctx.close()
