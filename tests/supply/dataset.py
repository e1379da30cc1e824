"""A hand-built, invented clinic for the supply tests: each pregnancy chosen for one rule.

No real people or facilities. Every date is UTC (the clinic's time zone is UTC here), the
forecast is made at NOW = Mon 1 June 2026 12:00, so day 0 is 1 June and the 12-week horizon
ends on day 83 (23 August). Weeks: week 1 = days 0-6, week 2 = days 7-13, ... week 12 = days 77-83.

Profile bsh-2014 (two routine doses of 500 IU at 28+0 and 34+0, postpartum 500 IU, event doses
250 IU before 20 weeks and 500 IU after; targeted prophylaxis by cell-free fetal RHD). The
population RhD-negative frequency is f = 0.16, so by Hardy-Weinberg the d allele has
q = sqrt(0.16) = 0.4 and the D allele p = 0.6:

- partner RhD negative, paternity certain: P(baby RhD positive) = 0
- partner RhD positive, zygosity unknown:  P = 1 / (1 + q) = 1 / 1.4 = 0.714286
- partner not known (a random man):        P = 1 - q = 0.6
- cell-free fetal RHD negative:            P = 0

Each pregnancy is given by its EDD; 28+0 is EDD - 84 days, 34+0 is EDD - 42 days.

    W1 routine      EDD 3 Sep (day 94): routine 1 opens 11 Jun (day 10, week 2), routine 2 opens
                    23 Jul (day 52, week 8); birth after the horizon. An APH at 10+0 (5 Feb),
                    before 12 weeks: not needed, so not an event of the rate.
    W2 partner neg  EDD 21 Jun (day 20): both routine doses given; birth weight 0.
                    APH at 30+0 (12 Apr), 500 IU given: an event of the rate.
    W3 partner pos  EDD 1 Jul (day 30, week 5): both routine doses given; birth weight 0.714286.
                    APH at 26+0 (25 Mar), 500 IU given: an event of the rate.
    W4 partner ?    EDD 12 Jul (day 41, week 6): both routine doses given; birth weight 0.6.
    W5 fetal RHD-   EDD 10 Aug (day 70): fetal RHD negative at 16+0: routine 1 (opened 18 May)
                    and routine 2 (29 Jun) not needed, birth weight 0: nothing at all.
    W6 born         EDD 5 Jun, born 31 May 10:00, baby RhD positive, no dose yet: the
                    postpartum dose is due now (day 0, known).
    W7 event now    EDD 16 Nov: APH on 30 May 12:00 at 15+5 (250 IU band), no dose yet: due now
                    (day 0, known), and an event of the rate. Her routine doses open after the horizon.
    OLD             delivered last year; APH on 1 May 2025 (396 days ago): too old for the rate.
    GONE            EDD 20 Aug, status "transferred": her routine dose 2 (9 Jul) is not ours.

Events in the 365 days before NOW: W2 (500 IU), W3 (500 IU), W7 (250 IU) = 3.
"""
from __future__ import annotations

import itertools
from datetime import date, datetime, timedelta, timezone

from clinic.care import CareContext, load_profile, plan_pregnancy
from clinic.records.validate import validate_record
from clinic.supply.forecast import ProductKey, event_rate, needs_of_plan

NOW = datetime(2026, 6, 1, 12, 0, tzinfo=timezone.utc)
START = date(2026, 6, 1)
TZ = timezone.utc
FREQ = 0.16
A, B = "clinic-a", "clinic-b"
V500 = ProductKey("Anti-D 500 IU (100 µg)", 500)
V1500 = ProductKey("Anti-D 1500 IU (300 µg)", 1500)
_VALIDATE_AT = datetime(2030, 1, 1, tzinfo=timezone.utc)
_ids = itertools.count(1)


class Preg:
    """One invented pregnancy: its records, and its plan as of NOW."""

    def __init__(self, key: str, edd: str, *, facility: str = A, status: str = "ongoing"):
        self.key, self.facility = key, facility
        self.pregnancy = {"id": f"p-{key}", "kind": "pregnancy", "woman_id": f"w-{key}", "facility": facility,
                          **validate_record("pregnancy", {"booked_on": "2025-12-01", "edd": edd, "status": status},
                                            now=_VALIDATE_AT)}
        self.woman = {"id": f"w-{key}", "kind": "woman", "name": f"Invented {key}", "facility": facility}
        self.entries: list[dict] = []
        self.add("typing", abo="O", rhd="negative", tested_on="2025-12-01")
        self.add("screen", sampled_at="2025-12-01T09:00:00Z", result="negative")

    def add(self, kind: str, facility: str | None = None, **fields) -> dict:
        r = {"id": f"{kind}-{self.key}-{next(_ids):03d}", "kind": kind, "facility": facility or self.facility,
             "woman_id": self.woman["id"], "pregnancy_id": self.pregnancy["id"],
             "created_at": "2025-12-01T00:00:00Z", "created_by": "test", "version": 1, "schema": 1,
             **validate_record(kind, fields, now=_VALIDATE_AT, tz=TZ)}
        self.entries.append(r)
        return r

    def dose(self, given_at: str, amount: int, indication: str, **kw) -> dict:
        return self.add("dose", given_at=given_at, amount=amount, unit="IU", route="IM", lot="L-OLD",
                        lot_expiry="2027-12-31", indication=indication, given_by="Invented Midwife", **kw)

    def plan(self, now: datetime = NOW):
        ctx = CareContext(rhd_negative_frequency=FREQ, maternal_blood_volume_ml=5000.0, tz=TZ)
        return plan_pregnancy(self.woman, self.pregnancy, self.entries, now=now, profile=load_profile("bsh-2014"),
                              context=ctx)

    def event_places(self) -> dict[str, str]:
        return {e["id"]: e["facility"] for e in self.entries if e["kind"] == "event"}


def clinic_a() -> dict[str, Preg]:
    out: dict[str, Preg] = {}

    w1 = out["W1"] = Preg("W1", "2026-09-03")
    w1.add("event", event_kind="antepartum-haemorrhage", occurred_at="2026-02-05T10:00:00Z")

    w2 = out["W2"] = Preg("W2", "2026-06-21")
    w2.add("partner_typing", rhd="negative", paternity_certain=True, tested_on="2025-12-01")
    w2.dose("2026-03-30T10:00:00Z", 500, "routine-antenatal")
    e = w2.add("event", event_kind="antepartum-haemorrhage", occurred_at="2026-04-12T10:00:00Z")
    w2.dose("2026-04-12T15:00:00Z", 500, "sensitising-event", covers_id=e["id"])
    w2.dose("2026-05-11T10:00:00Z", 500, "routine-antenatal")

    w3 = out["W3"] = Preg("W3", "2026-07-01")
    w3.add("partner_typing", rhd="positive", tested_on="2025-12-01")
    e = w3.add("event", event_kind="antepartum-haemorrhage", occurred_at="2026-03-25T10:00:00Z")
    w3.dose("2026-03-25T15:00:00Z", 500, "sensitising-event", covers_id=e["id"])
    w3.dose("2026-04-09T10:00:00Z", 500, "routine-antenatal")
    w3.dose("2026-05-21T10:00:00Z", 500, "routine-antenatal")

    w4 = out["W4"] = Preg("W4", "2026-07-12")
    w4.dose("2026-04-20T10:00:00Z", 500, "routine-antenatal")
    w4.dose("2026-05-31T10:00:00Z", 500, "routine-antenatal")

    w5 = out["W5"] = Preg("W5", "2026-08-10")
    w5.add("fetal_rhd", result="negative", sampled_on="2026-02-23")

    w6 = out["W6"] = Preg("W6", "2026-06-05")
    w6.add("birth", born_at="2026-05-31T10:00:00Z", outcome="live-birth", baby_rhd="positive", dat="negative")

    w7 = out["W7"] = Preg("W7", "2026-11-16")
    w7.add("event", event_kind="antepartum-haemorrhage", occurred_at="2026-05-30T12:00:00Z")

    old = out["OLD"] = Preg("OLD", "2025-08-01", status="delivered")
    e = old.add("event", event_kind="antepartum-haemorrhage", occurred_at="2025-05-01T10:00:00Z")
    old.dose("2025-05-01T15:00:00Z", 500, "sensitising-event", covers_id=e["id"])
    old.add("birth", born_at="2025-08-01T10:00:00Z", outcome="live-birth", baby_rhd="negative", dat="negative")

    out["GONE"] = Preg("GONE", "2026-08-20", status="transferred")
    return out


def needs(pregs, days: int = 84):
    return [n for p in pregs.values()
            for n in needs_of_plan(p.plan(), pregnancy=p.pregnancy, start=START, days=days, tz=TZ)]


def rate(pregs, facility: str = A):
    return event_rate([(p.plan(), p.event_places()) for p in pregs.values()], facility=facility, now=NOW)


def day(n: int) -> date:
    return START + timedelta(days=n)


# ---- the district: clinic A above and a quiet clinic B ---------------------------------------
# Clinic A's stock of 500 IU vials: L-EARLY (5, expires 20 Jun = day 19) and L-LATE (2, 31 Jan 2027).
# Clinic B: one woman, BW1, EDD 29 Aug: routine doses on 6 Jun (day 5) and 18 Jul (day 47); no events.
# Its lots: B-SOON (5 vials, expires 3 Jun = day 2) and B-SPARE (4 vials, expires 31 Jul = day 60).

def clinic_a_lots():
    from clinic.supply.stock_plan import Lot

    return {V500: [Lot("L-EARLY", date(2026, 6, 20), 5), Lot("L-LATE", date(2027, 1, 31), 2)]}


def clinic_b() -> dict[str, Preg]:
    return {"BW1": Preg("BW1", "2026-08-29", facility=B)}


def clinic_b_lots():
    from clinic.supply.stock_plan import Lot

    return {V500: [Lot("B-SOON", date(2026, 6, 3), 5), Lot("B-SPARE", date(2026, 7, 31), 4)]}


def district_inputs(lead_time_days: int = 14):
    from clinic.supply.report import FacilityInput

    a, b = clinic_a(), clinic_b()
    return [FacilityInput(A, "Clinic A", needs(a), rate(a, A), [V500], clinic_a_lots(), lead_time_days),
            FacilityInput(B, "Clinic B", needs(b), rate(b, B), [V500], clinic_b_lots(), lead_time_days)]
