"""One form per entry kind, generated from the schema: every field shown with its label and
browser limits, defaults filled, saved through the HTML fallback, errors next to the field."""
from __future__ import annotations

import re

import pytest

from clinic.records.schema import ENTRY_KINDS, KINDS
from tests.web.conftest import days_ago


def _local_hour_ago():
    from datetime import datetime, timedelta
    from zoneinfo import ZoneInfo

    return (datetime.now(ZoneInfo("Africa/Nairobi")) - timedelta(hours=1)).strftime("%Y-%m-%dT%H:%M")


VALID = {
    "typing": {"abo": "O", "rhd": "negative", "tested_on": "@today"},
    "partner_typing": {"rhd": "positive", "rhd_zygosity": "unknown"},
    "fetal_rhd": {"result": "negative", "sampled_on": "@today", "ga_days": "20+1"},
    "screen": {"sampled_at": "@now", "result": "positive", "antibodies": ["anti-D"], "titre": "8",
               "titre_antibody": "anti-D"},
    "event": {"event_kind": "abdominal-trauma", "occurred_at": "@now"},
    "fmh": {"method": "kleihauer-betke", "sampled_at": "@now", "fetal_cells": "3", "cells_counted": "5000"},
    "dose": {"given_at": "@now", "amount": "500", "unit": "IU", "route": "IM", "lot": "L-1",
             "lot_expiry": "2030-01-01", "indication": "sensitising-event", "given_by": "Midwife Test"},
    "doppler": {"measured_at": "@now", "mca_psv_cm_s": "30", "ga_days": "24+0"},
    "fbs": {"sampled_at": "@now", "hb_g_dl": "9.5"},
    "iut": {"given_at": "@now", "volume_ml": "40"},
    "birth": {"born_at": "@now", "outcome": "live-birth", "baby_rhd": "positive"},
    "referral": {"referred_on": "@today", "to_facility": "Test Referral Hospital", "reason": "rising titre"},
}
# One bad value per kind and the field the error must be shown next to.
INVALID = {
    "typing": ("rhd", "purple"), "partner_typing": ("rhd", "maybe"), "fetal_rhd": ("ga_days", "50+0"),
    "screen": ("result", ""), "event": ("occurred_at", "2999-01-01T10:00"), "fmh": ("cells_counted", "10"),
    "dose": ("amount", "-1"), "doppler": ("mca_psv_cm_s", "400"), "fbs": ("hct_pct", "99"),
    "iut": ("volume_ml", "0"), "birth": ("baby_rhd", ""), "referral": ("to_facility", ""),
}


def _fill(kind):
    out = {}
    for k, v in VALID[kind].items():
        out[k] = {"@today": days_ago(0), "@now": _local_hour_ago()}.get(v, v) if isinstance(v, str) else v
    return out


def test_every_entry_kind_has_valid_and_invalid_examples():
    assert set(VALID) == set(ENTRY_KINDS) == set(INVALID)


@pytest.mark.parametrize("kind", ENTRY_KINDS)
def test_entry_form_shows_every_schema_field(clinician, booked, kind):
    client = clinician  # a clinician may write every entry kind
    pid = booked["pregnancy"]["id"]
    r = client.get(f"/pregnancies/{pid}/add/{kind}")
    assert r.status_code == 200
    html = r.get_data(as_text=True)
    assert f'data-kind="{kind}"' in html and 'data-api="/api/v1/records"' in html
    assert f'name="pregnancy_id" value="{pid}"' in html
    for f in KINDS[kind].fields:
        assert f'name="{f.name}"' in html, f.name
        assert f.label.replace("'", "&#39;") in html, f.label
        assert f'data-error-for="{f.name}"' in html


@pytest.mark.parametrize("kind", ENTRY_KINDS)
def test_entry_form_saves_and_shows_on_the_time_line(clinician, booked, store, kind):
    client = clinician  # a clinician may write every entry kind
    pid = booked["pregnancy"]["id"]
    r = client.post(f"/pregnancies/{pid}/add/{kind}", data=_fill(kind))
    assert r.status_code == 302, r.get_data(as_text=True)[-3000:]
    saved = [e for e in store.entries(pid) if e["kind"] == kind]
    assert saved, kind
    page = client.get(r.headers["Location"].split("#")[0]).get_data(as_text=True)
    assert f'id="r-{saved[-1]["id"]}"' in page
    assert KINDS[kind].label.replace("'", "&#39;") in page


@pytest.mark.parametrize("kind", ENTRY_KINDS)
def test_entry_form_error_is_shown_next_to_its_field(clinician, booked, store, kind):
    client = clinician  # a clinician may write every entry kind
    pid = booked["pregnancy"]["id"]
    field, bad = INVALID[kind]
    data = _fill(kind)
    data[field] = bad
    before = len(store.entries(pid))
    r = client.post(f"/pregnancies/{pid}/add/{kind}", data=data)
    assert r.status_code == 422
    html = r.get_data(as_text=True)
    m = re.search(rf'<p class="field-error" data-error-for="{field}"[^>]*>([^<]+)</p>', html)
    assert m, f"no error shown next to {field}"
    assert KINDS[kind].field(field).label.replace("'", "&#39;") in m.group(1)
    assert len(store.entries(pid)) == before, "nothing stored on a validation error"
    # What was typed stays in the form.
    assert "Please correct" in html


def test_number_inputs_carry_the_schema_range(clinician, booked):
    client = clinician  # a clinician may write every entry kind
    html = client.get(f"/pregnancies/{booked['pregnancy']['id']}/add/doppler").get_data(as_text=True)
    assert re.search(r'name="mca_psv_cm_s"[^>]*min="5"[^>]*max="150"', html)
    assert re.search(r'name="ga_days"[^>]*pattern=', html)
    assert re.search(
        r'type="datetime-local" id="f-measured_at" name="measured_at" value="\d{4}-\d\d-\d\dT\d\d:\d\d"', html
    )


def test_dose_form_defaults_to_the_stocked_product_and_the_proposed_dose(client, booked):
    pid = booked["pregnancy"]["id"]
    html = client.get(f"/pregnancies/{pid}/add/dose?dose_iu=500&category=event").get_data(as_text=True)
    assert 'name="product" value="Anti-D 1500"' in html
    assert 'name="amount" value="500"' in html
    assert '<option value="sensitising-event" selected>' in html
    assert 'name="given_by" value="Midwife Test"' in html


def test_dose_form_links_the_event_it_covers(client, booked, store):
    pid = booked["pregnancy"]["id"]
    ev = store.create(
        "event",
        {"event_kind": "abdominal-trauma", "occurred_at": _local_hour_ago()},
        by="mwangi",
        facility="test-clinic",
        pregnancy_id=pid,
    ).record
    html = client.get(f"/pregnancies/{pid}/add/dose?covers={ev['id']}").get_data(as_text=True)
    assert f'<option value="{ev["id"]}" selected>Event · abdominal-trauma' in html


def test_unknown_entry_kind_is_404(client, booked):
    assert client.get(f"/pregnancies/{booked['pregnancy']['id']}/add/potion").status_code == 404


def test_entry_form_for_unknown_pregnancy_is_404(client):
    r = client.get("/pregnancies/nope/add/dose")
    assert r.status_code == 404
    assert "No pregnancy with id nope" in r.get_data(as_text=True)


def test_resubmitting_the_same_form_id_stores_once(client, booked, store):
    pid = booked["pregnancy"]["id"]
    data = _fill("referral") | {"id": "6f1c9c7e-8d2b-4c1e-9a57-1d2e3f4a5b6c"}
    assert client.post(f"/pregnancies/{pid}/add/referral", data=data).status_code == 302
    assert client.post(f"/pregnancies/{pid}/add/referral", data=data).status_code == 302
    assert len([e for e in store.entries(pid) if e["kind"] == "referral"]) == 1


def test_forms_with_a_ga_field_show_the_ga_today(clinician, booked):
    client = clinician  # a clinician may write every entry kind
    html = client.get(f"/pregnancies/{booked['pregnancy']['id']}/add/doppler").get_data(as_text=True)
    assert "GA today 20+0" in html and "Leave the GA empty" in html
