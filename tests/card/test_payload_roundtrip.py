"""Every field the card carries comes back exactly as stored; the tables cover the schema."""
from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from clinic.card import payload as pl
from clinic.card.codec import make_card_text, read_card
from clinic.records.schema import KINDS
from tests.card.histories import record

# Envelope keys the card carries; the others are set on import (created_by, origin, schema)
# or not carried (amendments: the card holds current values and the version).
CARRIED_ENVELOPE = ("id", "kind", "facility", "woman_id", "pregnancy_id", "created_at", "amended_at",
                    "version", "voided", "voided_reason")


def carried(rec):
    out = {k: v for k, v in rec.items() if k in CARRIED_ENVELOPE or k in pl.CARD_FIELDS[rec["kind"]]}
    if not out.get("voided"):
        out.pop("voided", None)
    return out


def roundtrip(history, key, trust, issue=1):
    w, p, e = history
    ct = make_card_text(w, p, e, key=key, issue=issue, issued_at="2026-11-20T12:00:00Z",
                        issuer_name="North Demo Clinic", issuer_phone="+000 555 0100")
    r = read_card(ct.text, trust)
    assert r.trust == "trusted", r.reason
    return ct, r


def test_every_field_of_the_full_history_round_trips(full, clinic_key, trust):
    ct, r = roundtrip(full, clinic_key, trust)
    w, p, e = full
    assert carried(r.content.woman) == carried(w)
    assert carried(r.content.pregnancy) == carried(p)
    got = {x["id"]: x for x in r.content.entries}
    assert set(got) == {x["id"] for x in e}
    for x in e:
        assert carried(got[x["id"]]) == carried(x), x["kind"]
    c = r.content
    assert (c.issuer_id, c.issuer_name, c.issuer_phone, c.issue, c.issued_at, c.omitted) == \
        ("DEMO-CLINIC-NORTH", "North Demo Clinic", "+000 555 0100", 1, "2026-11-20T12:00:00Z", 0)


def test_small_history_with_stated_age_and_weak_d_round_trips(small, clinic_key, trust):
    _, r = roundtrip(small, clinic_key, trust)
    assert r.content.woman["stated_age"] == 27 and "birth_date" not in r.content.woman
    assert r.content.entries[0]["rhd"] == "weak-d" and r.content.entries[0]["weak_d_type"] == "4.0"


def test_amended_voided_and_foreign_entries_keep_their_envelope(small, clinic_key, trust):
    w, p, e = small
    e[0] = dict(e[0], version=3, amended_at="2026-09-02T08:00:00Z")
    e[1] = dict(e[1], voided=True, voided_reason="sample mislabelled", facility="DEMO-LAB-EAST")
    _, r = roundtrip((w, p, e), clinic_key, trust)
    a, b = sorted(r.content.entries, key=lambda x: x["kind"])[::-1]
    assert (a["version"], a["amended_at"]) == (3, "2026-09-02T08:00:00Z")
    assert (b["voided"], b["voided_reason"], b["facility"]) == (True, "sample mislabelled", "DEMO-LAB-EAST")


def test_reference_to_an_entry_not_on_the_card_keeps_its_uuid(small, clinic_key, trust):
    w, p, e = small
    other = "0b7f64c1-3a55-4e2c-9d5e-7e6f0a1b2c3d"
    e.append(record("dose", 105, {"given_at": "2026-09-02T10:00:00Z", "amount": 1500, "unit": "IU", "route": "IM",
                                  "lot": "LOT-1", "lot_expiry": "2027-01-31", "indication": "sensitising-event",
                                  "given_by": "A. Demo", "covers_id": other},
                    woman_id=w["id"], pregnancy_id=p["id"]))
    _, r = roundtrip((w, p, e), clinic_key, trust)
    assert [x["covers_id"] for x in r.content.entries if x["kind"] == "dose"] == [other]


def test_card_tables_cover_every_schema_field():
    for kind, spec in KINDS.items():
        if kind not in pl.CARD_FIELDS:
            assert spec.parent == "facility", f"{kind} is neither on the card nor a facility record"
            continue
        for f in spec.field_names:
            assert f in pl.CARD_FIELDS[kind] or (kind, f) in pl.OMITTED_FIELDS, \
                f"{kind}.{f}: add it at the end of CARD_FIELDS[{kind!r}] or to OMITTED_FIELDS with a reason"
        for f in pl.CARD_FIELDS[kind]:
            assert f in spec.field_names, f"{kind}.{f} is on the card but not in the schema"
    assert set(pl.KIND_CODES) == set(pl.CARD_FIELDS)


def test_choice_tables_hold_every_schema_choice():
    for (kind, name), table in pl.CHOICE_TABLE.items():
        for c in KINDS[kind].field(name).choices:
            assert c in pl.CHOICES[table], f"{kind}.{name}: {c!r} would travel as text; append it to {table}"
    for kind in pl.CARD_FIELDS:
        for name in pl.CARD_FIELDS[kind]:
            f = KINDS[kind].field(name)
            if f.type in ("choice", "choices") and all(isinstance(c, str) for c in f.choices):
                assert (kind, name) in pl.CHOICE_TABLE, f"{kind}.{name} has no choice table"


screens = st.fixed_dictionaries({
    "sampled_at": st.datetimes(min_value=__import__("datetime").datetime(2024, 1, 1),
                               max_value=__import__("datetime").datetime(2026, 11, 1)).map(
        lambda d: d.replace(microsecond=0).isoformat() + "Z"),
    "ga_days": st.integers(28, 308),
    "result": st.just("positive"),
    "antibodies": st.lists(st.sampled_from(["anti-D", "anti-C", "anti-E", "anti-K"]), min_size=1, max_size=3,
                           unique=True),
    "titre": st.sampled_from([1, 2, 4, 8, 16, 32, 64, 128, 256, 512, 1024, 2048, 4096]),
    "anti_d_iu_ml": st.floats(0, 1000, allow_nan=False).map(lambda x: round(x, 2)),
    "lab": st.text(st.characters(min_codepoint=32, max_codepoint=0x2FFF, blacklist_categories=("Cs", "Cc")),
                   max_size=40).map(str.strip),
})


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(fields=screens)
def test_any_valid_screen_round_trips(fields, small, clinic_key, trust):
    w, p, e = small
    fields = dict(fields, titre_antibody=fields["antibodies"][0])
    if "anti-D" not in fields["antibodies"]:
        fields.pop("anti_d_iu_ml")
    if not fields["lab"]:
        fields.pop("lab")
    s = record("screen", 200, fields, woman_id=w["id"], pregnancy_id=p["id"])
    _, r = roundtrip((w, p, [s]), clinic_key, trust)
    assert carried(r.content.entries[0]) == carried(s)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(kind=st.sampled_from(["threatened-miscarriage", "antepartum-haemorrhage"]),
       facts=st.fixed_dictionaries({}, optional={"bleeding_heavy": st.booleans(), "bleeding_repeated": st.booleans(),
                                                 "abdominal_pain": st.booleans(), "ongoing": st.booleans()}))
def test_early_bleeding_facts_round_trip_yes_no_and_not_recorded(kind, facts, small, clinic_key, trust):
    # BSH 2014 (Qureshi et al.): bleeding that is repeated, heavy or with abdominal pain; "not
    # recorded" (absent) must come back absent, not as "no"
    w, p, e = small
    ev = record("event", 201, {"event_kind": kind, "occurred_at": "2026-09-02T08:00:00Z", "ga_days": "10+4",
                               **facts}, woman_id=w["id"], pregnancy_id=p["id"])
    _, r = roundtrip((w, p, [ev]), clinic_key, trust)
    back = r.content.entries[0]
    assert carried(back) == carried(ev)
    for name in ("bleeding_heavy", "bleeding_repeated", "abdominal_pain"):
        assert back.get(name) is facts.get(name)
