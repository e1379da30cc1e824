"""The demo women and what each one shows, as one readable table.

Every woman, clinic, member of staff, place and phone number here is invented. The
district (Selvara) and its facilities do not exist.

Each ``Story`` is a woman with one pregnancy: where she booked (``home``), the pathway
the care engine should put her on, a sentence saying what the demo shows with her, and
her timeline (``steps``); a story may give her an ``earlier`` pregnancy too (booked and
ended at her home facility before this one, with its own dating and steps). Times are
relative to the moment the demo is built (``now``),
so something is always due: ``ga("28+2")`` is a gestational age on her own dating,
``ago(days=1)`` is relative to now, ``last_month(12)`` is the 12th of the previous
calendar month at the facility, ``after("birth", hours=20)`` is relative to another
step. A step with ``site=`` happened at another facility; that facility holds a copy of
her earlier records (imported from her card) and the steps it added itself.

``expect`` says what the care engine must produce for her at ``expect_site`` (by default
the last facility that saw her). ``tests/demo/test_stories_match_care_engine.py`` checks
it, so the test fails when the engine or the demo drifts. Item codes match by prefix
(``event-dose`` matches ``event-dose:<id>``).

Find a story with ``story("a-missed-routine")``, by reading the list below, or in the
table of seed_demo/README.md (one row per story; a test keeps it complete).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

from clinic.records.values import parse_ga

SITE_HOME = None  # a step with site=None happened at the story's home facility


# ---- when things happened -----------------------------------------------------------

@dataclass(frozen=True)
class When:
    """A moment in a woman's timeline, resolved against ``now`` when the demo is built."""

    base: str  # "ga" | "ago" | "last-month" | "after"
    days: float = 0
    hours: float = 0
    hour: int = 10  # local clock hour, for "ga" and "last-month"
    minute: int = 0
    ref: str | None = None  # step label, for "after"


def ga(text: str | int, hour: int = 10, minute: int = 0) -> When:
    """At this gestational age (weeks+days) on her dating, local clock time."""
    return When("ga", days=parse_ga(text), hour=hour, minute=minute)


def ago(days: float = 0, hours: float = 0) -> When:
    """This long before now."""
    return When("ago", days=days, hours=hours)


def last_month(day: int, hour: int = 10, minute: int = 0) -> When:
    """On this day of the previous calendar month (facility time)."""
    if not 1 <= day <= 28:
        raise ValueError("last_month(day): day must be 1-28 so that every month has it")
    return When("last-month", days=day, hour=hour, minute=minute)


def after(ref: str, days: float = 0, hours: float = 0) -> When:
    """This long after the step labelled ``ref``."""
    return When("after", days=days, hours=hours, ref=ref)


# ---- what happened --------------------------------------------------------------------

@dataclass(frozen=True)
class Step:
    """One record in her timeline.

    Field values starting with ``@`` are filled in when the demo is built:
    ``@at`` the step's time (UTC), ``@date`` its local date, ``@ga`` her gestational age
    then, ``@lab`` the facility's laboratory, ``@step:LABEL`` the id of another step's
    record. Dose steps name a stock lot (``lot=``) instead of product/lot/expiry.
    ``kind="status"`` amends the pregnancy's status instead of adding a record.
    """

    kind: str
    when: When
    fields: Mapping[str, Any]
    label: str | None = None
    site: str | None = SITE_HOME
    by: str = "midwife"  # role of the demo account that entered it
    lot: str | None = None  # for doses: "main", "short-dated", "expired", "small"


def booking_typing(at: When, rhd: str, abo: str = "O", **extra) -> Step:
    return Step("typing", at, {"abo": abo, "rhd": rhd, "method": "column-agglutination",
                               "tested_on": "@date", "lab": "@lab", **extra}, label="typing", by="lab")


def screen(at: When, result: str = "negative", label: str | None = None, site: str | None = SITE_HOME,
           **extra) -> Step:
    return Step("screen", at, {"sampled_at": "@at", "ga_days": "@ga", "result": result,
                               "lab": "@lab", **extra}, label=label, by="lab", site=site)


def dose(at: When, amount: float, indication: str, *, unit: str = "IU", lot: str = "main",
         covers: str | None = None, route: str = "IM", label: str | None = None,
         site: str | None = SITE_HOME) -> Step:
    fields = {"given_at": "@at", "amount": amount, "unit": unit, "route": route,
              "indication": indication, "given_by": "@given_by"}
    if covers:
        fields["covers_id"] = f"@step:{covers}"
    return Step("dose", at, fields, label=label, lot=lot, site=site)


def event(at: When, kind: str, label: str = "event", notes: str = "", ongoing: bool | None = None,
          site: str | None = SITE_HOME, **bleeding: bool) -> Step:
    """A sensitising event; ``bleeding``: bleeding_heavy, bleeding_repeated, abdominal_pain."""
    fields: dict[str, Any] = {"event_kind": kind, "occurred_at": "@at", "ga_days": "@ga"}
    if notes:
        fields["notes"] = notes
    if ongoing is not None:
        fields["ongoing"] = ongoing
    fields.update(bleeding)
    return Step("event", at, fields, label=label, site=site)


# Bleeding as the form records it when none of the three boxes is ticked.
NOT_HEAVY = {"bleeding_heavy": False, "bleeding_repeated": False, "abdominal_pain": False}


def rosette(at: When, result: str, covers: str, site: str | None = SITE_HOME) -> Step:
    return Step("fmh", at, {"method": "rosette", "sampled_at": "@at", "rosette_result": result,
                            "covers_id": f"@step:{covers}"}, by="lab", site=site)


def kleihauer(at: When, percent: float, covers: str, site: str | None = SITE_HOME) -> Step:
    return Step("fmh", at, {"method": "kleihauer-betke", "sampled_at": "@at",
                            "fetal_cell_percent": percent, "covers_id": f"@step:{covers}"},
                by="lab", site=site)


def birth(at: When, baby_rhd: str = "positive", outcome: str = "live-birth", site: str | None = SITE_HOME,
          baby_abo: str = "O") -> list[Step]:
    return [
        Step("birth", at, {"born_at": "@at", "ga_days": "@ga", "outcome": outcome, "baby_abo": baby_abo,
                           "baby_rhd": baby_rhd, "dat": "negative" if baby_rhd != "not-tested" else "not-done",
                           "cord_sampled": baby_rhd != "not-tested"}, label="birth", site=site),
        Step("status", at, {"status": "delivered"}, site=site),
    ]


def partner(at: When, rhd: str, **extra) -> Step:
    return Step("partner_typing", at, {"rhd": rhd, "tested_on": "@date", **extra}, by="lab")


def fetal(at: When, result: str) -> Step:
    return Step("fetal_rhd", at, {"result": result, "sampled_on": "@date", "ga_days": "@ga",
                                  "lab": "Selvara Referral Hospital laboratory"}, by="lab")


def doppler(at: When, psv: float, site: str | None = SITE_HOME) -> Step:
    return Step("doppler", at, {"measured_at": "@at", "ga_days": "@ga", "mca_psv_cm_s": psv},
                by="clinician", site=site)


def referral(at: When, to: str, reason: str, question: str = "") -> Step:
    f = {"referred_on": "@date", "to_facility": to, "reason": reason}
    if question:
        f["question"] = question
    return Step("referral", at, f, by="clinician")


# ---- what the care engine must say -----------------------------------------------------

@dataclass(frozen=True)
class Expect:
    """Care-engine outputs this story is built to show (checked by the demo tests)."""

    pathway: str | tuple[str, ...]  # one pathway, or those allowed when it depends on the day
    managed_as: str | None = None
    # item code prefix -> allowed states
    items: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    # item code prefixes whose hard deadline (closes) must still be ahead
    closes_ahead: tuple[str, ...] = ()
    # item code prefix -> timeliness
    timeliness: Mapping[str, str] = field(default_factory=dict)
    # alert codes (prefix) that must be raised
    alerts: tuple[str, ...] = ()
    # item code prefix -> the dose (IU) the engine proposes for it
    doses: Mapping[str, int] = field(default_factory=dict)


@dataclass(frozen=True)
class Earlier:
    """An earlier pregnancy of the story's woman, at her home facility: its own dating (anchored
    like the story's) and timeline. Its ``ga()`` times are on its own dating."""

    dating: tuple[str, When]
    steps: tuple[Step, ...]
    booked: str = "11+2"
    gravidity: int = 1
    parity: int = 0


@dataclass(frozen=True)
class Story:
    key: str  # stable: the seed of every id of hers (uuid5), the same in every site and run
    name: str
    home: str  # site key where she booked
    pathway: str
    shows: str
    dating: tuple[str, When]  # her GA was this at that moment (LMP is worked back from it)
    steps: tuple[Step, ...]
    expect: Expect
    booked: str = "11+2"  # GA at booking
    age: int = 26
    gravidity: int = 2
    parity: int = 1
    multiple: int = 1
    village: str = ""
    expect_site: str | None = None  # default: the last site with a step of its own
    pregnancy_fields: Mapping[str, Any] = field(default_factory=dict)  # extra fields of her pregnancy record
    earlier: Earlier | None = None  # an earlier pregnancy of hers (at her home facility)

    @property
    def sites(self) -> tuple[str, ...]:
        """Sites holding her records, in the order she was seen there."""
        out = [self.home]
        for s in self.steps + (self.earlier.steps if self.earlier else ()):
            if s.site and s.site not in out:
                out.append(s.site)
        return tuple(out)

    @property
    def checked_at(self) -> str:
        return self.expect_site or self.sites[-1]


def _neg_booking(booked: str = "11+2", abo: str = "O") -> list[Step]:
    return [booking_typing(ga(booked, 10), "negative", abo), screen(ga(booked, 10, 5), label="booking-screen")]


def _pos_booking(booked: str = "11+2", abo: str = "A") -> list[Step]:
    return [booking_typing(ga(booked, 10), "positive", abo), screen(ga(booked, 10, 5), label="booking-screen")]


def _routine(ga_text: str, amount=1500, unit="IU", lot="main", site=SITE_HOME, label="routine-1") -> list[Step]:
    return [screen(ga(ga_text, 9), label=f"{label}-screen"),
            dose(ga(ga_text, 9, 30), amount, "routine-antenatal", unit=unit, lot=lot, site=site, label=label)]


PROPH = "prophylaxis"
NOT_NEEDED = "not-needed"
ENDED = "ended"


def _positive(key, name, home, ga_now, village, abo="A", age=27, g=2, p=1):
    booked = min(parse_ga("11+2"), parse_ga(ga_now) - 2)  # booked at least two days ago
    booked_text = f"{booked // 7}+{booked % 7}"
    return Story(key, name, home, NOT_NEEDED, f"RhD-positive booking, now {ga_now}: no anti-D needed",
                 (ga_now, ago()), tuple(_pos_booking(booked_text, abo=abo)),
                 Expect(NOT_NEEDED, "positive"), booked=booked_text, age=age, gravidity=g, parity=p,
                 village=village)


HOSP = "Selvara Referral Hospital"

STORIES: tuple[Story, ...] = (
    # ---------------- clinic-a: Ambeni Health Centre (bsh-2014, single 1500 IU at 28 weeks) -------
    _positive("a-pos-1", "Amina Kessewa", "clinic-a", "14+2", "Ambeni", abo="A", age=23, g=1, p=0),
    _positive("a-pos-2", "Rosa Ndaletu", "clinic-a", "22+5", "Kivuli Ridge", abo="B", age=31, g=3, p=2),
    _positive("a-pos-3", "Farida Olowe-Brandt", "clinic-a", "30+1", "Ambeni", abo="O", age=28),
    _positive("a-pos-4", "Janeth Mwirigi", "clinic-a", "36+4", "Lower Tembe", abo="AB", age=35, g=4, p=3),
    _positive("a-pos-5", "Liesl Awuor", "clinic-a", "12+0", "Sokoro", abo="O", age=19, g=1, p=0),
    Story("a-neg-20w", "Nadia Oyieko", "clinic-a", PROPH,
          "RhD negative at 20 weeks, screen negative: routine dose not yet due (opens at 28 weeks)",
          ("20+3", ago()), tuple(_neg_booking()),
          Expect(PROPH, "negative", items={"routine-dose": ("not-yet-due",)}), village="Sokoro", age=24),
    Story("a-neg-due", "Grace Tembo-Lindqvist", "clinic-a", PROPH,
          "RhD negative at 28+2: the 28-week screen is taken and the routine dose is due today",
          ("28+2", ago()), tuple(_neg_booking() + [screen(ago(hours=3), label="screen-28")]),
          Expect(PROPH, "negative", items={"routine-dose": ("due",)}, doses={"routine-dose-1": 1500}),
          village="Ambeni", age=29),
    Story("a-neg-dosed", "Sofia Kamau-Reyes", "clinic-a", PROPH,
          "RhD negative at 32 weeks with the routine dose given at 28+3: done on time",
          ("32+0", ago()), tuple(_neg_booking() + _routine("28+3")),
          Expect(PROPH, "negative", items={"routine-dose": ("done",)}, timeliness={"routine-dose": "on-time"}),
          village="Kivuli Ridge", age=33, gravidity=3, parity=1),
    Story("a-missed-routine", "Esther Amollo", "clinic-a", PROPH,
          "THE MISSED ROUTINE DOSE: 28 weeks fell early last month and no routine anti-D was given",
          ("28+0", last_month(2)), tuple(_neg_booking() + [screen(last_month(2, 9), label="screen-28")]),
          Expect(PROPH, "negative", items={"routine-dose": ("missed", "overdue")}),
          village="Lower Tembe", age=30),
    Story("a-event-10w", "Priya Chelimo", "clinic-a", PROPH,
          "Threatened miscarriage at 10 weeks: light bleeding yesterday at 10+2, not heavy, not repeated, no "
          "pain; under bsh-2014 anti-D is not needed before 12 weeks for this (compare b-event-10w)",
          ("10+3", ago()), (booking_typing(ago(days=1, hours=1), "negative"),
                            screen(ago(days=1, hours=1), label="booking-screen"),
                            event(ago(days=1, hours=3), "threatened-miscarriage", notes="light bleeding, settled",
                                  **NOT_HEAVY)),
          Expect(PROPH, "negative", items={"event-dose": ("not-needed",)}), booked="10+2", village="Ambeni", age=22,
          gravidity=1, parity=0),
    Story("a-event-30w", "Mercy Odhiambo-Vance", "clinic-a", PROPH,
          "Sensitising event at 30 weeks: bleeding yesterday after the routine dose; Kleihauer small; "
          "event dose due within 72 hours",
          ("30+1", ago()), tuple(_neg_booking() + _routine("28+0") + [
              event(ago(days=1, hours=2), "antepartum-haemorrhage", notes="small bleed, settled"),
              kleihauer(ago(days=1), 0.02, covers="event")]),
          Expect(PROPH, "negative", items={"event-dose": ("due",)}, closes_ahead=("event-dose",),
                 doses={"event-dose": 500}),
          village="Sokoro", age=27),
    Story("a-pp-within-72h", "Zawadi Lindgren", "clinic-a", PROPH,
          "Born 30 hours ago, baby RhD positive: postpartum dose due, 42 hours left",
          ("39+5", ago(hours=30)), tuple(_neg_booking() + _routine("28+1") + birth(ago(hours=30)) + [
              kleihauer(ago(hours=28), 0.01, covers="birth")]),
          Expect(PROPH, "negative", items={"postpartum-dose": ("due",)}, closes_ahead=("postpartum-dose",),
                 doses={"postpartum-dose": 500}), village="Ambeni", age=25),
    Story("a-pp-past-72h", "Irene Kasembe", "clinic-a", PROPH,
          "Born 5 days ago, baby RhD positive, no dose: past 72 hours (a late dose may still help)",
          ("39+0", ago(days=5)), tuple(_neg_booking() + _routine("28+2") + birth(ago(days=5))),
          Expect(PROPH, "negative", items={"postpartum-dose": ("overdue", "missed")}),
          village="Kivuli Ridge", age=32, gravidity=3, parity=2),
    Story("a-weak-d", "Leila Mutua-Hart", "clinic-a", NOT_NEEDED,
          "Weak D type 1 by genotyping: managed as RhD positive, no anti-D",
          ("24+1", ago()), (booking_typing(ga("11+2"), "weak-d", weak_d_type="1", method="molecular"),
                            screen(ga("11+2", 10, 5), label="booking-screen")),
          Expect(NOT_NEEDED, "positive"), village="Ambeni", age=28),
    Story("a-partner-neg", "Ruth Ashiundu", "clinic-a", PROPH,
          "RhD negative, baby's father known RhD negative (paternity certain): the fetus is very "
          "likely RhD negative; prophylaxis is still offered as an informed choice",
          ("26+0", ago()), tuple(_neg_booking() + [partner(ga("12+0"), "negative", abo="O", paternity_certain=True)]),
          Expect(PROPH, "negative"), village="Lower Tembe", age=34, gravidity=4, parity=2),
    Story("a-cfdna-neg", "Yasmin Owino", "clinic-a", PROPH,
          "RhD negative; fetal RHD negative by cell-free DNA at 16 weeks: targeted prophylaxis, "
          "routine anti-D and its pre-dose screen not needed",
          ("29+0", ago()), tuple(_neg_booking() + [fetal(ga("16+1"), "negative")]),
          Expect(PROPH, "negative", items={"routine-dose": ("not-needed",)}), village="Sokoro", age=26),
    Story("a-inconclusive", "Catarina Njeri", "clinic-a", "retest",
          "Inconclusive RhD typing at booking: repeat the typing; managed as RhD negative meanwhile",
          ("13+4", ago()), (booking_typing(ga("12+6"), "inconclusive", abo="A"),
                            screen(ga("12+6", 10, 5), label="booking-screen")),
          Expect("retest"), village="Ambeni", age=21, gravidity=1, parity=0),
    Story("a-expired-lot", "Olga Barasa", "clinic-a", PROPH,
          "Routine dose given 6 days ago from a lot that had expired: expired-lot alert",
          ("29+2", ago()), tuple(_neg_booking() + [screen(ago(days=6, hours=1), label="screen-28"),
                                                   dose(ago(days=6), 1500, "routine-antenatal", lot="expired")]),
          Expect(PROPH, "negative", alerts=("lot-expired",)), village="Kivuli Ridge", age=29),
    Story("a-moved-to-b", "Fatuma Kiptoo", "clinic-a", PROPH,
          "Booked at Ambeni, moved to Rusoka at 27 weeks; Rusoka imported her card and gave the "
          "routine dose (same pregnancy id in both clinics). Ambeni has not seen Rusoka's records and "
          "still lists her dose as overdue; the district, with both bundles, sees it given",
          ("31+0", ago()), tuple(_neg_booking() + [
              screen(ga("27+5", 10), site="clinic-b", label="screen-28"),
              dose(ga("28+1", 10), 300, "routine-antenatal", unit="ug", site="clinic-b", label="routine-1")]),
          Expect(PROPH, "negative", items={"routine-dose": ("done",)}), village="Ambeni", age=24,
          gravidity=2, parity=1),
    Story("a-lm-on-time", "Neema Solberg", "clinic-a", PROPH,
          "Born last month, baby RhD positive, postpartum dose 20 hours after birth (on time)",
          ("39+4", last_month(14, 6)), tuple(_neg_booking() + _routine("28+2") + birth(last_month(14, 6)) + [
              kleihauer(after("birth", hours=2), 0.01, covers="birth"),
              dose(after("birth", hours=20), 500, "postpartum", covers="birth", lot="small")]),
          Expect(ENDED, items={"postpartum-dose": ("done",)}, timeliness={"postpartum-dose": "on-time"}),
          village="Sokoro", age=27),
    Story("a-lm-late", "Agnes Mwakio", "clinic-a", PROPH,
          "Born last month; THE LATE POSTPARTUM DOSE: given 4 days after birth (within the 10-day late window)",
          ("39+1", last_month(8, 14)), tuple(_neg_booking() + _routine("28+0") + birth(last_month(8, 14)) + [
              dose(after("birth", days=4, hours=2), 500, "postpartum", covers="birth", lot="small")]),
          Expect(ENDED, items={"postpartum-dose": ("done",)}, timeliness={"postpartum-dose": "late"}),
          village="Lower Tembe", age=31),
    Story("a-lm-missed", "Tamar Oketch", "clinic-a", PROPH,
          "Born early last month, baby RhD positive, no postpartum dose: missed",
          ("40+1", last_month(3, 3)), tuple(_neg_booking() + _routine("28+4") + birth(last_month(3, 3))),
          Expect(ENDED, items={"postpartum-dose": ("missed",)}), village="Kivuli Ridge", age=36,
          gravidity=5, parity=4),
    Story("a-screen-positive", "Nasra Wekesa-Lund", "clinic-a", PROPH,
          "THE UNANSWERED SCREEN: booked late at 20+1, RhD negative, antibody screen positive but no "
          "antibody identified yet: an identification task (a week) and an alert for a clinician; "
          "routine anti-D is still planned",
          ("20+4", ago()), (booking_typing(ago(days=3, hours=1), "negative"),
                            screen(ago(days=3), "positive", label="booking-screen")),
          Expect(PROPH, "negative", items={"antibody-identification": ("due",), "routine-dose": ("not-yet-due",)},
                 closes_ahead=("antibody-identification",), alerts=("antibody-unidentified",)),
          booked="20+1", village="Sokoro", age=29, gravidity=3, parity=2),

    Story("a-earlier-missed", "Beatrice Wanjala-Roos", "clinic-a", PROPH,
          "A MISSED DOSE TRAVELS WITH HER: two years ago her baby was RhD positive and no anti-D was given "
          "after the birth; booked again today at 10+4: an alert at booking asks for the antibody screen, "
          "and her card says it",
          ("10+4", ago()), (booking_typing(ago(hours=2), "negative"),),
          Expect(PROPH, "negative", items={"booking-screen": ("due",)}, alerts=("earlier-dose-missed",)),
          booked="10+4", village="Sokoro", age=29, gravidity=2, parity=1,
          earlier=Earlier(("40+1", ago(days=730)), tuple(_neg_booking() + _routine("28+2")
                                                          + birth(ga("40+1", 4), baby_abo="A")))),

    # ---------------- clinic-b: Rusoka Health Centre (acog-2017, 300 µg at 28 weeks) -------------
    _positive("b-pos-1", "Joyce Wafula", "clinic-b", "16+0", "Rusoka", abo="O", age=25),
    _positive("b-pos-2", "Selin Adongo", "clinic-b", "27+3", "Mavuno Flats", abo="A", age=30, g=3, p=1),
    _positive("b-pos-3", "Maribel Chege", "clinic-b", "33+6", "Rusoka", abo="B", age=22, g=1, p=0),
    _positive("b-pos-4", "Hawa Lusweti", "clinic-b", "9+5", "Oloshi", abo="O", age=38, g=6, p=4),
    _positive("b-pos-5", "Dorcas Imbuga", "clinic-b", "20+2", "Mavuno Flats", abo="A", age=29),
    _positive("b-pos-6", "Ottilie Chepkurui", "clinic-b", "25+4", "Rusoka", abo="O", age=26),
    Story("b-untyped", "Elif Naliaka", "clinic-b", "untyped",
          "Booked yesterday, blood group not yet known: typing and screen due",
          ("12+1", ago()), (), Expect("untyped", "untyped", items={"booking-typing": ("due", "overdue")}),
          booked="12+0", village="Oloshi", age=20, gravidity=1, parity=0),
    Story("b-neg-24w", "Abigail Ngeno", "clinic-b", PROPH,
          "RhD negative at 24 weeks: 28-week screen and dose ahead",
          ("24+0", ago()), tuple(_neg_booking(abo="A")),
          Expect(PROPH, "negative", items={"routine-dose": ("not-yet-due",)}), village="Rusoka", age=28),
    Story("b-neg-due", "Ingrid Musyoka", "clinic-b", PROPH,
          "RhD negative at 28+1 under acog-2017: routine 300 µg due this week",
          ("28+1", ago()), tuple(_neg_booking()),
          Expect(PROPH, "negative", items={"routine-dose": ("due",)}), village="Mavuno Flats", age=31),
    Story("b-routine-overdue", "Esi Marangu", "clinic-b", PROPH,
          "RhD negative at 31+2: 28-week screen taken but no routine dose (the clinic was out of stock "
          "that week): overdue, still worth giving under acog-2017 until 36+6",
          ("31+2", ago()), tuple(_neg_booking() + [screen(ga("28+1", 9), label="screen-28")]),
          Expect(PROPH, "negative", items={"routine-dose": ("overdue",)}), village="Oloshi", age=25),
    Story("b-neg-dosed", "Pendo Akinyi-Falk", "clinic-b", PROPH,
          "RhD negative at 34 weeks, 300 µg given at 28+2",
          ("34+0", ago()), tuple(_neg_booking() + _routine("28+2", amount=300, unit="ug")),
          Expect(PROPH, "negative", items={"routine-dose": ("done",)}), village="Rusoka", age=27),
    Story("b-event-10w", "Consolata Mberi", "clinic-b", PROPH,
          "Threatened miscarriage at 10 weeks under acog-2017: light bleeding yesterday at 10+2; the profile "
          "gives anti-D, 50 µg (250 IU) as the clinic stocks that vial (compare a-event-10w)",
          ("10+3", ago()), (booking_typing(ago(days=1, hours=1), "negative"),
                            screen(ago(days=1, hours=1), label="booking-screen"),
                            event(ago(days=1, hours=3), "threatened-miscarriage", notes="light bleeding, settled",
                                  **NOT_HEAVY)),
          Expect(PROPH, "negative", items={"event-dose": ("due",)}, doses={"event-dose": 250}), booked="10+2",
          village="Oloshi", age=23, gravidity=2, parity=0),
    Story("b-ended-14w", "Wairimu Hagen", "clinic-b", ENDED,
          "Complete miscarriage at 14 weeks three weeks ago; 300 µg given within 72 hours; pregnancy ended",
          ("17+0", ago()), tuple(_neg_booking() + [
              event(ago(days=21), "miscarriage", notes="complete miscarriage, managed at the centre"),
              dose(ago(days=20, hours=20), 300, "sensitising-event", unit="ug", covers="event"),
              Step("status", ago(days=20, hours=19), {"status": "ended-early"})]),
          Expect(ENDED, items={"event-dose": ("done",)}), village="Mavuno Flats", age=33, gravidity=3, parity=1),
    Story("b-pp-within-72h", "Nia Omondi-Berg", "clinic-b", PROPH,
          "Born 10 hours ago at Rusoka, baby RhD positive: postpartum dose due",
          ("40+0", ago(hours=10)), tuple(_neg_booking() + _routine("28+0", 300, "ug") + birth(ago(hours=10))),
          Expect(PROPH, "negative", items={"postpartum-dose": ("due",)}, closes_ahead=("postpartum-dose",),
                 doses={"postpartum-dose": 1500}), village="Rusoka", age=26),
    Story("b-lm-on-time", "Sabina Kerubo", "clinic-b", PROPH,
          "Born last month, dose 30 hours after birth (on time)",
          ("38+6", last_month(19, 22)),
          tuple(_neg_booking() + _routine("28+1", 300, "ug") + birth(last_month(19, 22)) + [
              rosette(after("birth", hours=4), "negative", covers="birth"),
              dose(after("birth", hours=30), 300, "postpartum", unit="ug", covers="birth")]),
          Expect(ENDED, items={"postpartum-dose": ("done",)}, timeliness={"postpartum-dose": "on-time"}),
          village="Oloshi", age=24),
    Story("b-lm-late", "Lucia Mwende", "clinic-b", PROPH,
          "Born last month, dose given on day 6 (late)",
          ("39+3", last_month(10, 11)),
          tuple(_neg_booking() + _routine("28+0", 300, "ug") + birth(last_month(10, 11)) + [
              rosette(after("birth", hours=5), "negative", covers="birth"),
              dose(after("birth", days=6), 300, "postpartum", unit="ug", covers="birth")]),
          Expect(ENDED, items={"postpartum-dose": ("done",)}, timeliness={"postpartum-dose": "late"}),
          village="Rusoka", age=29),
    Story("b-lm-missed", "Tatu Ogalo", "clinic-b", PROPH,
          "Born on the 1st of last month, no postpartum dose: under acog-2017 a dose may still be given "
          "up to 28 days after birth, so she is overdue until then and missed after",
          ("40+2", last_month(1, 1)), tuple(_neg_booking() + _routine("28+3", 300, "ug") + birth(last_month(1, 1))),
          Expect((PROPH, ENDED), items={"postpartum-dose": ("missed", "overdue")}), village="Mavuno Flats", age=35,
          gravidity=4, parity=3),
    Story("b-lm-baby-neg", "Ylva Achola", "clinic-b", PROPH,
          "Born last month, baby RhD negative: postpartum dose not needed",
          ("39+2", last_month(16, 8)),
          tuple(_neg_booking() + _routine("28+2", 300, "ug") + birth(last_month(16, 8), baby_rhd="negative")),
          Expect(ENDED, items={"postpartum-dose": ("not-needed",)}), village="Oloshi", age=28),
    Story("b-lm-routine", "Miriam Koros", "clinic-b", PROPH,
          "Routine window last month: 300 µg given at 28+1 early last month (on time)",
          ("28+1", last_month(6, 9)), tuple(_neg_booking() + [
              screen(last_month(6, 8), label="screen-28"),
              dose(last_month(6, 9), 300, "routine-antenatal", unit="ug", label="routine-1")]),
          Expect(PROPH, "negative", items={"routine-dose": ("done",)}), village="Rusoka", age=32),
    Story("b-to-hospital", "Anyango Petrova", "clinic-b", PROPH,
          "Referred from Rusoka to the hospital at 36 weeks (breech); born there 2 days ago, "
          "postpartum dose given at the hospital within 72 hours",
          ("39+1", ago(days=2)), tuple(_neg_booking() + _routine("28+1", 300, "ug") + [
              referral(ga("36+0"), HOSP, "breech presentation at 36 weeks", "delivery planning")]
              + birth(ago(days=2), site="hospital") + [
              kleihauer(after("birth", hours=3), 0.01, covers="birth", site="hospital"),
              dose(after("birth", hours=8), 500, "postpartum", covers="birth", site="hospital", lot="small")]),
          Expect(ENDED, items={"postpartum-dose": ("done",)}, timeliness={"postpartum-dose": "on-time"}),
          village="Mavuno Flats", age=30),

    # ---------------- clinic-c: Pellow Landing Clinic (bsh-2014, two doses of 500 IU) ------------
    _positive("c-pos-1", "Naomi Keter", "clinic-c", "18+3", "Pellow Landing", abo="O", age=24),
    _positive("c-pos-2", "Adhiambo Lisowski", "clinic-c", "31+2", "Birchwater", abo="A", age=33, g=3, p=2),
    _positive("c-pos-3", "Kerstin Moraa", "clinic-c", "11+6", "Kesero", abo="B", age=27, g=1, p=0),
    _positive("c-pos-4", "Salma Jeptoo", "clinic-c", "26+0", "Pellow Landing", abo="O", age=30),
    _positive("c-pos-5", "Beata Nyaboke", "clinic-c", "37+1", "Birchwater", abo="A", age=21, g=1, p=0),
    _positive("c-pos-6", "Halima Wanyonyi", "clinic-c", "21+4", "Kesero", abo="O", age=34, g=5, p=3),
    Story("c-neg-16w", "Winnie Cheruiyot", "clinic-c", PROPH,
          "RhD negative at 16 weeks under the two-dose regimen: both doses ahead",
          ("16+2", ago()), tuple(_neg_booking()),
          Expect(PROPH, "negative", items={"routine-dose-1": ("not-yet-due",)}), village="Kesero", age=22),
    Story("c-dose2-due", "Bahati Omollo", "clinic-c", PROPH,
          "Two-dose regimen: 500 IU given at 28+0; the second 500 IU is due at 34 weeks (now 34+1)",
          ("34+1", ago()), tuple(_neg_booking() + _routine("28+0", 500, lot="small")),
          Expect(PROPH, "negative", items={"routine-dose-1": ("done",), "routine-dose-2": ("due",)},
                 doses={"routine-dose-2": 500}),
          village="Pellow Landing", age=29),
    Story("c-partial-d", "Lydia Otieno-Salas", "clinic-c", PROPH,
          "Partial D (DVI): managed as RhD negative, prophylaxis offered",
          ("22+0", ago()), (booking_typing(ga("11+2"), "partial-d", partial_d_category="DVI"),
                            screen(ga("11+2", 10, 5), label="booking-screen")),
          Expect(PROPH, "negative"), village="Birchwater", age=31),
    Story("c-weak-d-untyped", "Imani Wambui", "clinic-c", PROPH,
          "Weak D, type not known: managed as RhD negative until genotyped",
          ("19+3", ago()), (booking_typing(ga("11+2"), "weak-d", abo="B"),
                            screen(ga("11+2", 10, 5), label="booking-screen")),
          Expect(PROPH, "negative"), village="Kesero", age=25),
    Story("c-passive-anti-d", "Selma Chepkoech", "clinic-c", PROPH,
          "Weak anti-D found after the 28-week dose, judged passive (0.1 IU/mL): prophylaxis continues",
          ("31+3", ago()), tuple(_neg_booking() + _routine("28+2", 500, lot="small") + [
              screen(ga("31+0"), "positive", antibodies=["anti-D"], anti_d_iu_ml=0.1, anti_d_origin="passive")]),
          Expect(PROPH, "negative"), village="Pellow Landing", age=28),
    Story("c-sensitised", "Josephine Awino-Kraft", "clinic-c", "surveillance",
          "SENSITISED: immune anti-D at booking with rising titres (1:8 to 1:64); referred to the hospital, "
          "MCA Doppler series rising; no anti-D prophylaxis",
          ("27+2", ago()), (
              booking_typing(ga("12+0"), "negative"),
              screen(ga("12+0", 10, 5), "positive", antibodies=["anti-D"], titre=8, anti_d_iu_ml=2.1,
                     anti_d_origin="immune", label="booking-screen"),
              partner(ga("13+0"), "positive", abo="A", rhd_zygosity="heterozygous", paternity_certain=True),
              screen(ga("16+0"), "positive", antibodies=["anti-D"], titre=16, anti_d_iu_ml=4.5, anti_d_origin="immune"),
              fetal(ga("16+0", 11), "positive"),
              referral(ga("16+1"), HOSP, "immune anti-D, titre rising 1:8 to 1:16; previous baby jaundiced",
                       "fetal medicine review and MCA Doppler surveillance"),
              Step("screen", ga("20+0", 9), {"sampled_at": "@at", "ga_days": "@ga", "result": "positive",
                                             "antibodies": ["anti-D"], "titre": 32, "anti_d_iu_ml": 9.8,
                                             "anti_d_origin": "immune", "lab": "@lab"}, site="hospital", by="lab"),
              doppler(ga("20+0", 11), 27.0, site="hospital"),
              doppler(ga("22+0", 11), 31.0, site="hospital"),
              Step("screen", ga("24+0", 9), {"sampled_at": "@at", "ga_days": "@ga", "result": "positive",
                                             "antibodies": ["anti-D"], "titre": 64, "anti_d_iu_ml": 18.0,
                                             "anti_d_origin": "immune", "lab": "@lab"}, site="hospital", by="lab"),
              doppler(ga("24+0", 11), 36.0, site="hospital"),
              doppler(ga("26+0", 11), 42.0, site="hospital"),
              doppler(ga("27+0", 11), 46.0, site="hospital")),
          Expect("surveillance", "negative"), booked="12+0", village="Birchwater", age=32, gravidity=3, parity=2,
          pregnancy_fields={"prior_sensitising": "second baby had jaundice needing phototherapy"}),
    Story("c-twins", "Saida Jelimo", "clinic-c", PROPH,
          "RhD negative with twins at 26 weeks: routine doses ahead",
          ("26+1", ago()), tuple(_neg_booking()),
          Expect(PROPH, "negative", items={"routine-dose-1": ("not-yet-due",)}), multiple=2, village="Kesero", age=30),
    Story("c-lm-window", "Maren Obuya", "clinic-c", PROPH,
          "Routine window last month: first 500 IU given at 28+1 last month (on time), second ahead",
          ("28+1", last_month(9, 10)), tuple(_neg_booking() + [
              screen(last_month(9, 9), label="screen-28"),
              dose(last_month(9, 10), 500, "routine-antenatal", lot="small", label="routine-1")]),
          Expect(PROPH, "negative", items={"routine-dose-1": ("done",)}), village="Pellow Landing", age=26),
    Story("c-lm-on-time", "Dina Nafula", "clinic-c", PROPH,
          "Born last month, postpartum 500 IU 12 hours after birth (on time)",
          ("39+6", last_month(21, 4)), tuple(_neg_booking() + _routine("28+0", 500, lot="small")
                                             + [dose(ga("34+0"), 500, "routine-antenatal", lot="small",
                                                     label="routine-2")]
                                             + birth(last_month(21, 4)) + [
              kleihauer(after("birth", hours=2), 0.01, covers="birth"),
              dose(after("birth", hours=12), 500, "postpartum", covers="birth", lot="small")]),
          Expect(ENDED, items={"postpartum-dose": ("done",)}, timeliness={"postpartum-dose": "on-time"}),
          village="Birchwater", age=23),
    Story("c-lm-late", "Kawira Ostberg", "clinic-c", PROPH,
          "Born last month, postpartum dose on day 5 (late)",
          ("38+5", last_month(12, 16)), tuple(_neg_booking() + _routine("28+1", 500, lot="small")
                                              + [dose(ga("34+1"), 500, "routine-antenatal", lot="small",
                                                      label="routine-2")]
                                              + birth(last_month(12, 16)) + [
              dose(after("birth", days=5), 500, "postpartum", covers="birth", lot="small")]),
          Expect(ENDED, items={"postpartum-dose": ("done",)}, timeliness={"postpartum-dose": "late"}),
          village="Kesero", age=27),
    Story("c-lm-missed", "Lovisa Anyona", "clinic-c", PROPH,
          "Born early last month at home, baby RhD positive, no dose: missed",
          ("39+0", last_month(5, 2)),
          tuple(_neg_booking() + _routine("28+2", 500, lot="small") + birth(last_month(5, 2))),
          Expect(ENDED, items={"postpartum-dose": ("missed",)}), village="Pellow Landing", age=37, gravidity=6,
          parity=5),
    Story("c-missed-window", "Tove Anyango", "clinic-c", PROPH,
          "Routine window closed last month without the first 500 IU (did not attend at 28 weeks)",
          ("28+0", last_month(1)), tuple(_neg_booking()),
          Expect(PROPH, "negative", items={"routine-dose-1": ("missed", "overdue")}), village="Birchwater", age=24),

    # ---------------- hospital: Selvara Referral Hospital (bsh-2014) -----------------------------
    _positive("h-pos-1", "Rukia Mbithi", "hospital", "35+0", "Selvara Town", abo="A", age=29),
    _positive("h-pos-2", "Emilia Kiprono", "hospital", "19+2", "Selvara Town", abo="O", age=34, g=2, p=1),
    Story("h-trauma", "Viktoria Adoyo", "hospital", PROPH,
          "Abdominal trauma (road accident) at 32 weeks 2 days ago: 500 IU given at once; the Kleihauer "
          "then showed a large bleed (0.8 %, about 20 mL of fetal red cells): the engine asks for 2000 IU more",
          ("32+2", ago()), tuple(_neg_booking() + _routine("28+2") + [
              event(ago(days=2, hours=4), "abdominal-trauma", notes="road accident, seat belt"),
              kleihauer(ago(days=2, hours=3), 0.8, covers="event"),
              dose(ago(days=2, hours=2), 500, "sensitising-event", covers="event", lot="small")]),
          Expect(PROPH, "negative", items={"event-dose": ("done",), "event-fmh-dose": ("due",)},
                 closes_ahead=("event-fmh-dose",), alerts=("fmh-large",), doses={"event-fmh-dose": 2000}),
          village="Selvara Town", age=27),
    Story("h-pp-large-fmh", "Rehema Lindahl", "hospital", PROPH,
          "THE FMH TOTAL: born 20 hours ago, baby RhD positive, Kleihauer 1 % (25 mL fetal red cells): "
          "3125 IU in all, so the standard 500 IU plus 2625 IU more, not 3125 more",
          ("39+6", ago(hours=20)), tuple(_neg_booking() + _routine("28+0") + birth(ago(hours=20)) + [
              kleihauer(after("birth", hours=2), 1.0, covers="birth")]),
          Expect(PROPH, "negative", items={"postpartum-dose": ("due",), "postpartum-fmh-dose": ("due",)},
                 closes_ahead=("postpartum-fmh-dose",), alerts=("fmh-large",),
                 doses={"postpartum-dose": 500, "postpartum-fmh-dose": 2625}),
          village="Selvara Town", age=31, gravidity=3, parity=2),
    Story("h-pp-done", "Margit Chepngeno", "hospital", PROPH,
          "Born at the hospital 40 hours ago; postpartum 500 IU given 10 hours after birth: done",
          ("39+3", ago(hours=40)), tuple(_neg_booking() + _routine("28+0") + birth(ago(hours=40)) + [
              kleihauer(after("birth", hours=2), 0.02, covers="birth"),
              dose(after("birth", hours=10), 500, "postpartum", covers="birth", lot="small")]),
          Expect(ENDED, items={"postpartum-dose": ("done",)}, timeliness={"postpartum-dose": "on-time"}),
          village="Selvara Town", age=31),
)


def story(key: str) -> Story:
    """The story with this key; KeyError naming the known keys otherwise."""
    for s in STORIES:
        if s.key == key:
            return s
    raise KeyError(f"no demo story {key!r}; known: {', '.join(s.key for s in STORIES)}")


def stories_at(site: str) -> list[Story]:
    """Stories whose records a site holds (its own women and copies of women seen there)."""
    return [s for s in STORIES if site in s.sites]


def table() -> str:
    """The stories as a plain-text table (key, name, sites, pathway, what the demo shows)."""
    rows = [f"{s.key:<18} {s.name:<24} {'/'.join(s.sites):<20} {s.pathway:<13} {s.shows}" for s in STORIES]
    return "\n".join(rows)


def _expect_text(ex: Expect) -> str:
    parts = [ex.pathway if isinstance(ex.pathway, str) else " or ".join(ex.pathway)]
    parts += [f"{k} {'/'.join(v)}" for k, v in ex.items.items()]
    parts += [f"{k} {v}" for k, v in ex.timeliness.items()]
    parts += [f"{k} {v} IU" for k, v in ex.doses.items()]
    parts += [f"{k} closes ahead" for k in ex.closes_ahead]
    parts += [f"alert {a}" for a in ex.alerts]
    return ", ".join(parts)


def markdown_table() -> str:
    """The table of seed_demo/README.md (regenerate with ``python -m seed_demo.stories``)."""
    from seed_demo.sites import SITE_DEFS

    def short(site: str) -> str:
        return SITE_DEFS[site].name.replace(" Health Centre", " HC").replace(" Landing Clinic", "") \
            .replace("Selvara Referral Hospital", "Hospital")

    lines = ["| key | name | seen at | engine says | what the demo shows |", "|---|---|---|---|---|"]
    for s in STORIES:
        lines.append(f"| `{s.key}` | {s.name} | {' → '.join(short(x) for x in s.sites)} | "
                     f"{_expect_text(s.expect)} | {s.shows} |")
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    print(markdown_table(), end="")
