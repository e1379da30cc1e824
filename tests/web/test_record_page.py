"""The woman's record: identity, dating, the plan with reasons and sources, alerts, the time line
(voided and amended entries visible), add-entry links, charts, print styles."""
from __future__ import annotations

import re

from tests.web.conftest import at_ago


def test_record_page_shows_dating_plan_and_time_line(client, booked):
    pid = booked["pregnancy"]["id"]
    html = client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    assert "Amina Testcase" in html and "Reg. T-001" in html
    assert "GA today <strong>20+0</strong>" in html
    assert "managed as <strong>negative</strong>" in html
    assert "Source:" in html  # each suggestion with its source
    assert f'id="r-{booked["typing"]["id"]}"' in html and f'id="r-{booked["screen"]["id"]}"' in html
    assert "Decision support only." in html


def test_record_page_links_a_form_for_every_entry_kind(clinician, booked):
    from clinic.records.schema import ENTRY_KINDS

    client = clinician  # a clinician may write every entry kind

    pid = booked["pregnancy"]["id"]
    html = client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    for kind in ENTRY_KINDS:
        assert f'href="/pregnancies/{pid}/add/{kind}"' in html, kind


def test_due_dose_has_a_record_this_dose_link_with_defaults(client, store, booked):
    pid = booked["pregnancy"]["id"]
    ev = store.create("event", {"event_kind": "abdominal-trauma", "occurred_at": at_ago(hours=1)},
                      by="mwangi", facility="test-clinic", pregnancy_id=pid).record
    html = client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    m = re.search(r'href="(/pregnancies/[^"]+/add/dose\?[^"]+)">Record this dose', html)
    assert m
    link = m.group(1).replace("&amp;", "&")
    assert f"covers={ev['id']}" in link and "category=event" in link
    form = client.get(link).get_data(as_text=True)
    assert f'<option value="{ev["id"]}" selected>' in form


def test_woman_page_lists_her_pregnancies(client, booked):
    wid = booked["woman"]["id"]
    html = client.get(f"/women/{wid}").get_data(as_text=True)
    assert "Amina Testcase" in html
    assert f'href="/pregnancies/{booked["pregnancy"]["id"]}"' in html
    assert f'href="/book?woman_id={wid}"' in html


def test_unknown_woman_and_pregnancy_are_404(client, booked):
    assert client.get("/women/nope").status_code == 404
    assert client.get("/pregnancies/nope").status_code == 404
    assert client.get(f"/women/{booked['pregnancy']['id']}").status_code == 404


def test_titre_and_mca_charts_are_drawn_as_svg(client, store, booked):
    pid = booked["pregnancy"]["id"]
    for weeks_ago, titre in ((6, 4), (2, 16)):
        store.create("screen", {"sampled_at": at_ago(days=7 * weeks_ago), "result": "positive",
                                "antibodies": ["anti-D"], "titre": titre, "titre_antibody": "anti-D",
                                "anti_d_origin": "immune"},
                     by="mwangi", facility="test-clinic", pregnancy_id=pid)
    store.create("doppler", {"measured_at": at_ago(hours=3), "mca_psv_cm_s": 30},
                 by="mwangi", facility="test-clinic", pregnancy_id=pid)
    html = client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    svgs = re.findall(r"(?s)<svg.*?</svg>", html)
    assert len(svgs) == 2
    assert re.search(r"1:16 at 1[78]\+\d", svgs[0]) and re.search(r"1:4 at 1[34]\+\d", svgs[0])
    assert svgs[1].count('class="curve') == 3 and "1.29" in svgs[1] and "1.0 MoM" in svgs[1]
    assert re.search(r"30 cm/s at (19\+6|20\+0) \(1\.\d\d MoM\)", svgs[1])


def test_no_chart_without_data(client, booked):
    html = client.get(f"/pregnancies/{booked['pregnancy']['id']}").get_data(as_text=True)
    assert "<svg" not in html


def test_pages_have_print_styles(client, booked):
    with client.get("/static/css/app.css") as r:
        css = r.get_data(as_text=True)
    assert "@media print" in css
    html = client.get(f"/pregnancies/{booked['pregnancy']['id']}").get_data(as_text=True)
    # The print button has no inline handler (the CSP forbids them): session.js prints.
    assert re.search(r"<button[^>]*data-print", html)
    with client.get("/static/js/session.js") as r:
        assert "window.print()" in r.get_data(as_text=True)


def test_api_pregnancy_returns_woman_entries_and_plan(client, booked):
    j = client.get(f"/api/v1/pregnancies/{booked['pregnancy']['id']}").get_json()
    assert j["woman"]["name"] == "Amina Testcase"
    assert {e["kind"] for e in j["entries"]} == {"typing", "screen"}
    assert j["plan"]["pathway"] == "prophylaxis"
    assert j["plan"]["dating"]["ga_days"] == 140
    assert client.get("/api/v1/pregnancies/nope").status_code == 404


def test_base_layout_has_the_offline_hooks(client):
    html = client.get("/").get_data(as_text=True)
    for hook in ('<span id="net-state"></span>', '<span id="outbox-count"></span>', "/static/js/outbox/start.js",
                 "/static/js/app.js", "/static/css/app.css", 'name="viewport"',
                 'rel="manifest" href="/manifest.webmanifest"'):
        assert hook in html, hook


def test_no_external_urls_in_pages(client, booked):
    for url in ("/", f"/pregnancies/{booked['pregnancy']['id']}", "/book", "/calc/", "/stock"):
        html = client.get(url).get_data(as_text=True)
        assert not re.search(r'(src|href)="(https?:)?//', html), url


def test_record_page_links_her_card(client, app, booked):
    pid = booked["pregnancy"]["id"]
    html = client.get(f"/pregnancies/{pid}").get_data(as_text=True)
    if "card.pregnancy_card" in app.view_functions:
        from flask import url_for

        with app.test_request_context():
            assert f'href="{url_for("card.pregnancy_card", pregnancy_id=pid)}"' in html


def test_nav_links_the_other_blueprints(client, app):
    html = client.get("/").get_data(as_text=True)
    for bp, label in (("card", "Cards"), ("district", "District")):
        if any(r.endpoint.startswith(bp + ".") and not r.arguments for r in app.url_map.iter_rules()):
            assert f">{label}</a>" in html
