"""Invariants of the plan over generated histories (hypothesis): the order of the entries never
changes the plan; no prophylaxis is suggested after immune sensitisation; no dose is zero or
negative; every FMH vial count is whole."""
import json
from datetime import timedelta

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from clinic.records.schema import EVENT_KINDS
from tests.care.builders import birth, booked_negative, dose, event, make_plan, rec, screen, utc

START = utc(2026, 3, 1)   # LMP


def _t(days: float) -> str:
    return f"{START + timedelta(days=days):%Y-%m-%dT%H:%M:%SZ}"


@st.composite
def histories(draw):
    entries = booked_negative()
    n_routine = draw(st.integers(0, 2))
    for d in sorted(draw(st.lists(st.floats(24 * 7, 37 * 7), min_size=n_routine, max_size=n_routine))):
        if draw(st.booleans()):
            entries.append(screen(_t(d - 0.1)))
        entries.append(dose(_t(d), draw(st.sampled_from([500, 1500])), lot=draw(st.sampled_from(["A", "B"]))))
    for _ in range(draw(st.integers(0, 3))):
        d = draw(st.floats(6 * 7, 39 * 7))
        facts = draw(st.fixed_dictionaries({}, optional={k: st.booleans() for k in (
            "bleeding_heavy", "bleeding_repeated", "abdominal_pain")}))
        e = event(_t(d), draw(st.sampled_from(EVENT_KINDS)), ongoing=draw(st.booleans()), **facts)
        entries.append(e)
        if draw(st.booleans()):
            entries.append(rec("fmh", method="kleihauer-betke", sampled_at=_t(d + 0.05), covers_id=e["id"],
                               fetal_cell_percent=draw(st.sampled_from([0.01, 0.2, 1.0, 3.0]))))
        if draw(st.booleans()):
            entries.append(dose(_t(d + draw(st.floats(0, 12))), draw(st.sampled_from([250, 500, 1500])),
                                indication="sensitising-event", covers_id=e["id"]))
    immune_day = None
    if draw(st.booleans()):
        immune_day = draw(st.floats(10 * 7, 39 * 7))
        entries.append(screen(_t(immune_day), "positive", antibodies=["anti-D"], anti_d_origin="immune",
                              titre=draw(st.sampled_from([2, 8, 32, 128])), titre_antibody="anti-D"))
    if draw(st.booleans()):
        b_day = draw(st.floats(30 * 7, 41 * 7))
        b = birth(_t(b_day), baby_rhd=draw(st.sampled_from(["positive", "negative", "not-tested"])))
        entries.append(b)
        if draw(st.booleans()):
            entries.append(dose(_t(b_day + draw(st.floats(0, 12))), 1500, indication="postpartum", covers_id=b["id"]))
    now = START + timedelta(days=draw(st.floats(8 * 7, 44 * 7)))
    profile = draw(st.sampled_from(["bsh-2014", "bsh-2014-single", "acog-2017", "acog-2017-early-2024"]))
    return entries, now, profile, immune_day


SETTINGS = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@SETTINGS
@given(h=histories(), data=st.data())
def test_the_order_of_entries_never_changes_the_plan(h, data):
    entries, now, profile, _ = h
    shuffled = data.draw(st.permutations(entries))
    a = make_plan(entries, now=now, profile=profile).to_dict()
    b = make_plan(list(shuffled), now=now, profile=profile).to_dict()
    assert json.dumps(a, sort_keys=True) == json.dumps(b, sort_keys=True)


@SETTINGS
@given(h=histories())
def test_never_a_prophylaxis_suggestion_after_immune_sensitisation(h):
    entries, now, profile, immune_day = h
    plan = make_plan(entries, now=now, profile=profile)
    if immune_day is not None and START + timedelta(days=immune_day) <= now:
        assert plan.pathway in ("surveillance", "ended")
        open_ = [i.code for i in plan.items if i.category in ("routine", "event", "postpartum")
                 and i.state in ("not-yet-due", "due", "overdue")]
        assert open_ == []


@SETTINGS
@given(h=histories())
def test_never_a_non_positive_dose_and_states_are_known(h):
    entries, now, profile, _ = h
    plan = make_plan(entries, now=now, profile=profile)
    for i in plan.items:
        assert i.dose_iu is None or (isinstance(i.dose_iu, int) and i.dose_iu > 0)
        assert i.state in ("not-yet-due", "due", "overdue", "done", "not-needed", "missed")
        if i.state == "done":
            assert i.timeliness in ("on-time", "late") and i.done_at is not None
        else:
            assert i.timeliness is None
        if i.closes and i.late_until:
            assert i.late_until >= i.closes
    json.dumps(plan.to_dict())
