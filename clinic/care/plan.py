"""plan_pregnancy: one pregnancy's history + now + profile -> what is due, overdue, missed, wrong.

The engine reads stored record dicts (schema.py), skips voided ones and ones dated after
``now`` (a plan is "as of now"), sorts the rest by (time, id) so the order given never
matters, and derives every item from the profile. Nothing here stores anything.
"""
from __future__ import annotations

import functools
import tomllib
from dataclasses import dataclass
from datetime import date, datetime, time, timedelta, timezone
from importlib import resources

from clinic.care import calc
from clinic.care.dating import Dating, choose_dating, profile_thresholds
from clinic.care.errors import CareInputError
from clinic.care.model import Alert, CareContext, Plan, PlanItem
from clinic.care.protocol import Profile
from clinic.records.schema import KINDS
from clinic.records.values import format_ga, parse_ga, parse_utc

SKEW = timedelta(minutes=10)
DUPLICATE_WITHIN = timedelta(minutes=30)
OPEN_STATES = ("not-yet-due", "due", "overdue")
IMMUNE_ANTI_D = "immune-anti-d"   # alert: the engine judges anti-D immune (record_ids: the screens, first first)


# ---- reading records -------------------------------------------------------------------

def _when_field(kind: str) -> str | None:
    return {"typing": "tested_on", "partner_typing": "tested_on", "fetal_rhd": "sampled_on",
            "screen": "sampled_at", "event": "occurred_at", "fmh": "sampled_at", "dose": "given_at",
            "doppler": "measured_at", "fbs": "sampled_at", "iut": "given_at", "birth": "born_at",
            "referral": "referred_on"}.get(kind)


class _History:
    """The entries of one pregnancy, read once: parsed times, grouped by kind, in a fixed order."""

    def __init__(self, entries, now: datetime, tz):
        self.tz = tz
        rows = []
        for e in entries:
            if not isinstance(e, dict):
                raise CareInputError("entries", f"each entry must be a stored record (a dict), not {type(e).__name__}")
            if e.get("voided"):
                continue
            _check_required(e)
            t = self.when(e)
            if t is not None and t > now + SKEW:
                continue  # not yet happened as of ``now``
            rows.append((t or _created(e), str(e.get("id", "")), e))
        rows.sort(key=lambda r: (r[0], r[1]))
        self.by_kind: dict[str, list[dict]] = {}
        self.time: dict[str, datetime] = {}
        for t, rid, e in rows:
            self.by_kind.setdefault(e.get("kind"), []).append(e)
            self.time[rid] = t

    def when(self, e: dict) -> datetime | None:
        f = _when_field(e.get("kind", ""))
        v = e.get(f) if f else None
        if v is None:
            return None
        if f.endswith("_on"):
            return _midnight(date.fromisoformat(v), self.tz)
        return parse_utc(v)

    def of(self, kind: str) -> list[dict]:
        return self.by_kind.get(kind, [])


def _check_required(e: dict) -> None:
    """A stored entry missing a required field cannot be planned: say which one."""
    spec = KINDS.get(e.get("kind"))
    if spec is None:
        raise CareInputError("kind", f"entry {e.get('id')!r} has kind {e.get('kind')!r}; allowed: "
                                     f"{', '.join(k for k, v in KINDS.items() if v.parent == 'pregnancy')}")
    if "id" not in e:
        raise CareInputError("id", f"a {e['kind']} entry has no id")
    for f in spec.fields:
        if f.required and e.get(f.name) in (None, ""):
            raise CareInputError(f"{e['kind']}.{f.name}", f"is required (entry {e['id']})")


def _created(e: dict) -> datetime:
    v = e.get("created_at")
    return parse_utc(v) if v else datetime(1900, 1, 1, tzinfo=timezone.utc)


def _midnight(d: date, tz) -> datetime:
    return datetime.combine(d, time(0), tzinfo=tz).astimezone(timezone.utc)


def _end_of_ga_day(dating: Dating, ga_days: int, tz) -> datetime:
    """The hard deadline of a GA window that closes on ``ga_days``: the next local midnight."""
    return _midnight(dating.date_at(ga_days + 1), tz)


def _state(now, opens, closes, late_until) -> str:
    if opens is not None and now < opens:
        return "not-yet-due"
    if closes is None or now <= closes:
        return "due"
    if late_until is None or now <= late_until:
        return "overdue"
    return "missed"


@functools.lru_cache(maxsize=1)
def _event_ga_ranges() -> tuple[str, dict[str, tuple[int, int]]]:
    """The usual GA range of each event kind, from clinic/care/event_ga.toml (data, reviewable)."""
    doc = tomllib.loads(resources.files("clinic.care").joinpath("event_ga.toml").read_text(encoding="utf-8"))
    ranges = {k: (parse_ga(lo), parse_ga(hi)) for k, (lo, hi) in doc["ranges"].items()}
    return doc["source"], ranges


def _event_words(e: dict) -> str:
    """An event's kind in plain words for titles and messages ("antepartum haemorrhage")."""
    return e["event_kind"].replace("-", " ")


def _fmt(dt: datetime, tz) -> str:
    return dt.astimezone(tz).strftime("%Y-%m-%d %H:%M")


# ---- RhD status ------------------------------------------------------------------------

def _rhd_status(typings: list[dict], profile: Profile, alerts: list[Alert]) -> dict:
    src = profile.section_source("rhd")
    if not typings:
        return {"recorded": None, "managed_as": "untyped", "reason": "no RhD typing recorded yet: type at booking",
                "record_id": None}
    t = typings[-1]
    values = {x["rhd"] for x in typings}
    if len({"positive", "negative"} & values) == 2:
        alerts.append(Alert("typing-discordant", "warning",
                            "RhD typings disagree (positive and negative recorded): send a new sample; "
                            "the most recent typing is used meanwhile", src, [x["id"] for x in typings]))
    r = t["rhd"]
    out = {"recorded": r, "record_id": t.get("id"), "weak_d_type": t.get("weak_d_type"),
           "partial_d_category": t.get("partial_d_category")}
    if r == "positive":
        out.update(managed_as="positive", reason="RhD positive: no anti-D prophylaxis")
    elif r == "negative":
        out.update(managed_as="negative", reason="RhD negative: anti-D prophylaxis pathway")
    elif r == "weak-d":
        wt = (t.get("weak_d_type") or "").strip()
        major = wt.split(".")[0] if wt else ""
        if major and major in profile.get("rhd.weak_d_types_managed_positive"):
            out.update(managed_as="positive", reason=f"weak D type {wt}: managed as RhD positive (no anti-D)")
        else:
            what = f"weak D type {wt}" if wt else "weak D, type not known"
            out.update(managed_as="negative", reason=f"{what}: managed as RhD negative until genotyped")
            if not wt:
                alerts.append(Alert("weak-d-genotype", "info",
                                    "weak D without a type: send for RHD genotyping; managed as RhD negative meanwhile",
                                    src, [t["id"]]))
    elif r == "partial-d":
        cat = t.get("partial_d_category")
        out.update(managed_as="negative",
                   reason=f"partial D{(' ' + cat) if cat else ''}: managed as RhD negative (can make anti-D)")
    else:
        out.update(managed_as="retest", reason="RhD typing inconclusive: retest on a new sample")
        alerts.append(Alert("typing-inconclusive", "warning", "RhD typing inconclusive: take a new sample and retest; "
                            "treat as RhD negative for any sensitising event meanwhile", src, [t["id"]]))
    return out


# ---- antibodies -------------------------------------------------------------------------

@dataclass
class _Antibodies:
    immune_at: datetime | None = None       # first immune anti-D sample
    immune_id: str | None = None
    surveillance: bool = False
    findings: list[dict] | None = None


def _antibodies(h: _History, doses: list[dict], profile: Profile, alerts: list[Alert]) -> _Antibodies:
    ab = profile.get("antibody")
    src = profile.section_source("antibody")
    out = _Antibodies(findings=[])
    immune_alert: Alert | None = None
    window = timedelta(days=ab["passive_window_days"])
    for s in h.of("screen"):
        if s.get("result") != "positive":
            continue
        t = parse_utc(s["sampled_at"])
        for name in s.get("antibodies") or []:
            titre = s.get("titre") if s.get("titre_antibody") == name else None
            finding = {"screen_id": s["id"], "antibody": name if name != "other" else (s.get("antibody_other") or "other"),
                       "sampled_at": s["sampled_at"], "titre": titre, "origin": None}
            if name == "anti-D":
                iu = s.get("anti_d_iu_ml")
                finding["iu_ml"] = iu
                recent = [d for d in doses if t - window <= d["_t"] <= t]
                rec = s.get("anti_d_origin")
                low = ((iu is not None and iu <= ab["passive_max_iu_ml"]) or
                       (iu is None and titre is not None and titre <= ab["passive_max_titre"]))
                known_level = iu is not None or titre is not None
                if rec == "immune":
                    origin, why = "immune", "recorded by the laboratory as immune"
                    if recent and known_level and low:
                        alerts.append(Alert("anti-d-origin-check", "warning",
                                            f"the laboratory judged the anti-D of {s['sampled_at'][:10]} immune, "
                                            f"although anti-D was given {(t - recent[-1]['_t']).days} days before and "
                                            f"the level is low (it could be passive): the laboratory's judgement is "
                                            f"used; a clinician confirms", src, [s["id"]]))
                elif rec == "passive":
                    origin, why = "passive", "recorded by the laboratory as passive"
                    if not recent:
                        alerts.append(Alert("anti-d-origin-check", "warning",
                                            f"the laboratory judged the anti-D of {s['sampled_at'][:10]} passive, but "
                                            f"no anti-D is recorded in the {ab['passive_window_days']} days before the "
                                            f"sample: record any dose given elsewhere or ask the laboratory to review; "
                                            f"treated as passive meanwhile", src, [s["id"]]))
                elif not recent:
                    origin, why = "immune", (f"no anti-D recorded in the {ab['passive_window_days']} days before the "
                                             f"sample, so not passive (record any anti-D given elsewhere)")
                elif known_level and low:
                    origin, why = "probable-passive", (f"anti-D given {(t - recent[-1]['_t']).days} days before, low "
                                                       f"level: probably passive")
                elif known_level:
                    origin, why = "immune", (f"level above the passive limits (≤ {ab['passive_max_iu_ml']} IU/mL or "
                                             f"titre ≤ 1:{ab['passive_max_titre']}) despite recent anti-D")
                else:
                    origin, why = "undetermined", "anti-D given recently but no titre or quantitation recorded"
                finding["origin"], finding["reason"] = origin, why
                if origin == "immune":
                    if out.immune_at is None:
                        out.immune_at, out.immune_id = t, s["id"]
                        # one alert for the pregnancy; record_ids: the first immune screen, then any later ones
                        immune_alert = Alert(IMMUNE_ANTI_D, "danger",
                                             f"immune anti-D found on {s['sampled_at'][:10]} ({why}): the woman is "
                                             f"sensitised; anti-D prophylaxis stops and the pregnancy follows the "
                                             f"surveillance pathway", src, [s["id"]])
                        alerts.append(immune_alert)
                    elif s["id"] not in immune_alert.record_ids:
                        immune_alert.record_ids.append(s["id"])
                    out.surveillance = True
                elif origin == "probable-passive":
                    alerts.append(Alert("anti-d-passive", "info",
                                        f"anti-D found on {s['sampled_at'][:10]}: {why}; prophylaxis continues "
                                        f"(a clinician confirms)", src, [s["id"]]))
                elif origin == "undetermined":
                    alerts.append(Alert("anti-d-undetermined", "warning",
                                        "anti-D found after recent prophylaxis without a titre or quantitation: ask the "
                                        "laboratory to quantify; prophylaxis continues until it is shown to be immune",
                                        src, [s["id"]]))
            else:
                finding["origin"] = "immune"
                finding["reason"] = "red cell antibody other than anti-D: surveillance for HDFN"
                out.surveillance = True
            out.findings.append(finding)
    return out


# ---- doses ------------------------------------------------------------------------------

def _read_doses(h: _History, tz, alerts: list[Alert], profile: Profile) -> list[dict]:
    counted: list[dict] = []
    src = profile.section_source("routine")
    for d in h.of("dose"):
        row = dict(d)
        row["_t"] = parse_utc(d["given_at"])
        row["_iu"] = int(d.get("dose_iu")
                         or round(calc.ug_to_iu(d["amount"]) if d.get("unit") == "ug" else d["amount"]))
        dup = next((c for c in counted if abs(c["_t"] - row["_t"]) <= DUPLICATE_WITHIN and c["_iu"] == row["_iu"]
                    and (c.get("lot") or "") == (row.get("lot") or "")), None)
        if dup is not None:
            alerts.append(Alert("duplicate-dose", "warning",
                                f"the same administration seems recorded twice ({row['_iu']} IU, lot {row.get('lot')}, "
                                f"{_fmt(row['_t'], tz)}): counted once; void the duplicate", src, [dup["id"], d["id"]]))
            continue
        exp = d.get("lot_expiry")
        if exp and date.fromisoformat(exp) < row["_t"].astimezone(tz).date():
            alerts.append(Alert("lot-expired", "danger",
                                f"lot {d.get('lot')} expired on {exp}, before it was given on "
                                f"{row['_t'].astimezone(tz).date().isoformat()}: tell the clinician and the blood bank; "
                                f"the dose may need repeating", src, [d["id"]]))
        counted.append(row)
    return counted


# ---- the plan ---------------------------------------------------------------------------

def plan_pregnancy(woman: dict, pregnancy: dict, entries, *, now: datetime, profile: Profile,
                   context: CareContext | None = None) -> Plan:
    """The plan for one pregnancy as of ``now`` (an aware datetime)."""
    if not isinstance(now, datetime) or now.tzinfo is None:
        raise CareInputError("now", "must be a timezone-aware date-time")
    if not isinstance(profile, Profile):
        raise CareInputError("profile", "must be a Profile from load_profile()")
    ctx = context or CareContext()
    now = now.astimezone(timezone.utc)
    return _Planner(woman or {}, pregnancy or {}, entries or [], now, profile, ctx).run()


class _Planner:
    def __init__(self, woman, pregnancy, entries, now, profile: Profile, ctx: CareContext):
        self.woman, self.preg, self.now, self.p, self.ctx, self.tz = woman, pregnancy, now, profile, ctx, ctx.tz
        self.h = _History(entries, now, self.tz)
        self.items: list[PlanItem] = []
        self.alerts: list[Alert] = []
        self.fmh_need: dict[str, int] = {}

    # -- helpers
    def ga_of(self, e: dict, t: datetime) -> int:
        g = e.get("ga_days")
        return int(g) if g is not None else self.dating.ga_days(t, self.tz)

    def at_ga(self, ga_days: int) -> datetime:
        return _midnight(self.dating.date_at(ga_days), self.tz)

    def add(self, **kw) -> PlanItem:
        it = PlanItem(**kw)
        self.items.append(it)
        return it

    def alert(self, code, severity, message, source, ids=()):
        self.alerts.append(Alert(code, severity, message, source, [i for i in ids if i]))

    # -- steps
    def run(self) -> Plan:
        p, tz = self.p, self.tz
        pr = self.preg
        try:
            self.dating = choose_dating(
                lmp=pr.get("lmp"), scan_on=pr.get("scan_on"), scan_crl_mm=pr.get("scan_crl_mm"),
                scan_ga_days=pr.get("scan_ga_days"), agreed_edd=pr.get("edd"), rule=p.get("dating.rule"),
                thresholds=profile_thresholds(p),
                source=p.section_source("dating"))
        except CareInputError as e:
            raise CareInputError(f"pregnancy.{e.field}", e.errors[e.field]) from None
        self.rhd = _rhd_status(self.h.of("typing"), p, self.alerts)
        self.doses = _read_doses(self.h, tz, self.alerts, p)
        self.ab = _antibodies(self.h, self.doses, p, self.alerts)
        self.births = self.h.of("birth")
        self.birth = self.births[0] if self.births else None
        self.born_at = parse_utc(self.birth["born_at"]) if self.birth else None
        self.fetal = self._fetal_rhd()
        managed = self.rhd["managed_as"]
        self.prophylaxis = managed in ("negative", "retest", "untyped")
        self.assigned: dict[str, list[dict]] = {}
        self._assign_doses()
        self._booking()
        self._partner_typing()
        self._fetal_rhd_test()
        if self.prophylaxis:
            self._routine()
            self._events()
            self._birth_items()
            self._fmh_extra()
        else:
            self._not_needed_note()
        if self.ab.surveillance:
            self._surveillance()
        self._dose_alerts()
        for it in self.items:
            if it.state == "not-needed":
                it.dose_iu = None
        pathway = self._pathway()
        ga_now = self.dating.ga_days(self.now, tz)
        dating = {"edd": self.dating.edd, "method": self.dating.method, "reason": self.dating.reason,
                  "source": self.dating.source, "ga_days": ga_now, "ga": format_ga(ga_now),
                  "lmp_edd": self.dating.lmp_edd, "scan_edd": self.dating.scan_edd,
                  "difference_days": self.dating.difference_days}
        rhd = {k: v for k, v in self.rhd.items()}
        return Plan(p.id, p.version, self.now, dating, rhd, pathway, self.fetal["probability"], self.fetal,
                    self.items, self.alerts, p.caution, self.ab.findings or [])

    def _fetal_rhd(self) -> dict:
        partners = self.h.of("partner_typing")
        fr = self.h.of("fetal_rhd")
        pt = partners[-1] if partners else {}
        result = fr[-1]["result"] if fr else None
        res = calc.fetal_rhd_probability(
            rhd_negative_frequency=self.ctx.rhd_negative_frequency, partner_rhd=pt.get("rhd", "unknown"),
            partner_zygosity=pt.get("rhd_zygosity") or "unknown",
            paternity_certain=pt.get("paternity_certain", True) is not False, fetal_rhd=result)
        res["cffdna_result"] = result
        res["cffdna_id"] = fr[-1]["id"] if fr else None
        targeted = self.p.get("routine.targeted_prophylaxis")
        res["targeted_not_needed"] = bool(result == "negative" and targeted)
        if result == "negative" and not targeted:
            self.alert("fetal-rhd-negative-not-used", "info",
                       "cell-free fetal RHD negative, but this profile does not use targeted prophylaxis: "
                       "anti-D is still offered", self.p.section_source("routine"), [res["cffdna_id"]])
        self.partner_negative = bool(pt.get("rhd") == "negative" and pt.get("paternity_certain")
                                     and self.p.get("routine.partner_negative_may_decline"))
        self.partner_id = pt.get("id")
        if self.partner_negative:
            if self.p.get("routine.partner_negative_skips_routine"):
                msg = ("the baby's father is RhD negative and paternity is certain: this profile marks routine "
                       "antenatal anti-D not needed; she may still choose to have it")
            else:
                msg = ("the baby's father is RhD negative and paternity is certain: the woman may choose to decline "
                       "routine antenatal anti-D (her informed choice, recorded by the midwife)")
            self.alert("partner-rhd-negative", "info", msg, self.p.section_source("routine"), [pt.get("id")])
        return res

    # -- which dose covers what
    def _assign_doses(self):
        events = {e["id"]: e for e in self.h.of("event")}
        birth_ids = {b["id"] for b in self.births}
        routine_n = len(self.p.routine_doses())
        routine_seen = 0
        self.unassigned: list[dict] = []
        for d in self.doses:
            cov = d.get("covers_id")
            key = None
            if cov and cov in events:
                key = f"event:{cov}"
            elif cov and cov in birth_ids:
                key = "postpartum"
            elif d["indication"] == "routine-antenatal":
                routine_seen += 1
                if routine_seen <= routine_n:
                    key = f"routine:{routine_seen}"
                else:
                    self.alert("routine-extra", "warning",
                               f"more routine antenatal doses recorded than the {routine_n} of this regimen",
                               self.p.section_source("routine"), [d["id"]])
                    key = "routine:extra"
            elif d["indication"] in ("postpartum",) or (self.born_at and d["_t"] >= self.born_at):
                key = "postpartum" if self.born_at else None
                if not self.born_at:
                    self.alert("postpartum-dose-without-birth", "warning",
                               "a postpartum dose is recorded but no birth: record the birth",
                               self.p.section_source("postpartum"), [d["id"]])
            else:  # sensitising-event or large-fmh without a link: the latest event before it
                late = timedelta(days=self.p.get("events.late_window_days"))
                cands = [e for e in events.values()
                         if self.h.time[e["id"]] <= d["_t"] <= self.h.time[e["id"]] + late]
                cands.sort(key=lambda e: (self.h.time[e["id"]], e["id"]))
                undosed = [e for e in cands if f"event:{e['id']}" not in self.assigned]
                pick = (undosed or cands or [None])[-1]
                key = f"event:{pick['id']}" if pick else None
            if key is None and d["indication"] == "postpartum":
                self.unassigned.append(d)   # already flagged: postpartum dose without a birth
            elif key is None:
                self.unassigned.append(d)
                self.alert("dose-unmatched", "info",
                           f"{d['_iu']} IU given {_fmt(d['_t'], self.tz)} ({d['indication']}) matches no event, birth "
                           f"or routine dose: link it with 'covers'", self.p.section_source("events"), [d["id"]])
            else:
                self.assigned.setdefault(key, []).append(d)

    def _stop_reason(self) -> str | None:
        """Why prophylaxis items that are not done are not needed, or None."""
        if self.ab.immune_at is not None and self.ab.immune_at <= self.now:
            return (f"immune anti-D found on {_fmt(self.ab.immune_at, self.tz)[:10]}: the woman is sensitised, "
                    f"prophylaxis no longer helps; surveillance pathway")
        if self.rhd["managed_as"] == "positive":
            return self.rhd["reason"]
        return None

    def _done(self, it: PlanItem, dose: dict, closes: datetime | None):
        it.state = "done"
        it.done_record_id = dose["id"]
        it.done_at = dose["_t"]
        it.timeliness = "on-time" if closes is None or dose["_t"] <= closes else "late"

    # -- booking
    def _booking(self):
        p, tz = self.p, self.tz
        booked = date.fromisoformat(self.preg["booked_on"]) if self.preg.get("booked_on") else None
        opens = _midnight(booked, tz) if booked else None
        late = _midnight(self.dating.edd + timedelta(days=1), tz)
        if self.born_at:
            late = min(late, self.born_at)
        for code, kind, days_key, title, cat in (
                ("booking-typing", "typing", "booking.typing_within_days", "Blood group and RhD at booking", "typing"),
                ("booking-screen", "screen", "booking.screen_within_days", "Antibody screen at booking", "screen")):
            closes = opens + timedelta(days=p.get(days_key) + 1) if opens else None
            recs = self.h.of(kind)
            it = self.add(code=code, category=cat, title=title, state="due", due=opens, opens=opens, closes=closes,
                          late_until=late, reason="", source=p.section_source("booking"))
            if recs:
                r = recs[0]
                t = self.h.time[r["id"]]
                it.state, it.done_record_id, it.done_at = "done", r["id"], t
                it.timeliness = "on-time" if closes is None or t < closes else "late"
                it.reason = "recorded"
            else:
                it.state = _state(self.now, opens, closes, late)
                if it.state == "missed":
                    it.reason = "not done before the birth"
                else:
                    it.reason = (f"take the sample{' now' if it.state != 'not-yet-due' else ''}: within "
                                 f"{p.get(days_key)} days of booking")

    def _window_until_birth(self, closes: datetime) -> datetime:
        """The late end of a pregnancy-long item: the day after the EDD, or the birth if earlier
        (never before ``closes``)."""
        late = _midnight(self.dating.edd + timedelta(days=1), self.tz)
        if self.born_at:
            late = min(late, self.born_at)
        return max(late, closes)

    def _typing_item_state(self, it: PlanItem, records: list[dict], what: str) -> bool:
        """Shared states of partner-typing and fetal-rhd-test. True when the item is decided."""
        managed = self.rhd["managed_as"]
        if managed == "positive":
            it.state, it.reason = "not-needed", self.rhd["reason"]
            return True
        if records:
            r = records[0]
            t = self.h.time[r["id"]]
            it.state, it.done_record_id, it.done_at = "done", r["id"], t
            it.timeliness = "on-time" if it.closes is None or t <= it.closes else "late"
            return True
        if self.born_at:
            if it.closes is not None and self.born_at <= it.closes:
                it.state, it.reason = "not-needed", "the baby was born before the window closed: the cord blood typing decides"
            else:
                it.state, it.reason = "missed", f"no {what} recorded before the birth"
            return True
        if self.preg.get("status") == "ended-early":
            it.state, it.reason = "not-needed", "the pregnancy ended early"
            return True
        return False

    # -- the father's RhD type
    def _partner_typing(self):
        p, tz = self.p, self.tz
        booked = date.fromisoformat(self.preg["booked_on"]) if self.preg.get("booked_on") else None
        opens = _midnight(booked, tz) if booked else None
        closes = _end_of_ga_day(self.dating, p.ga("partner_typing.closes_ga"), tz)
        it = self.add(code="partner-typing", category="typing", title="RhD type of the baby's father", state="due",
                      due=opens, opens=opens, closes=closes, late_until=self._window_until_birth(closes),
                      reason="", source=p.section_source("partner_typing"))
        if self.rhd["managed_as"] != "positive" and not p.get("partner_typing.offered"):
            it.state, it.reason = "not-needed", "this profile does not offer partner typing (partner_typing.offered)"
            return
        known = [x for x in self.h.of("partner_typing") if x.get("rhd") in ("positive", "negative")]
        if self._typing_item_state(it, known, "partner typing"):
            if it.state == "done":
                last = known[-1]
                certain = {True: ", paternity certain", False: ", paternity not certain"}.get(
                    last.get("paternity_certain"), "")
                it.reason = f"the baby's father is RhD {last['rhd']}{certain}"
            return
        it.state = _state(self.now, opens, closes, it.late_until)
        window = f"by {format_ga(p.ga('partner_typing.closes_ga'))}"
        unknown = self.h.of("partner_typing")
        it.reason = ("the father's RhD type is recorded as not known: type him if he is available" if unknown else
                     "offer to type the baby's father (if he is known and willing)") + f", {window}; if he is RhD " \
            "negative and paternity is certain she may choose to decline routine antenatal anti-D"
        if self.rhd["managed_as"] in ("untyped", "retest"):
            it.reason += "; only if she is RhD negative (her typing is not yet known)"

    # -- cell-free fetal RHD test (targeted prophylaxis)
    def _fetal_rhd_test(self):
        p, tz = self.p, self.tz
        o, c, l_ = (p.ga(f"fetal_rhd.{k}") for k in ("opens_ga", "closes_ga", "late_until_ga"))
        opens = self.at_ga(o)
        closes = _end_of_ga_day(self.dating, c, tz)
        late = _end_of_ga_day(self.dating, l_, tz)
        it = self.add(code="fetal-rhd-test", category="typing", title="Cell-free fetal RHD test", state="due",
                      due=opens, opens=opens, closes=closes, late_until=late, reason="",
                      source=p.section_source("fetal_rhd"))
        if not p.get("routine.targeted_prophylaxis"):
            it.state = "not-needed"
            it.reason = ("this profile does not use targeted prophylaxis (routine.targeted_prophylaxis is false): "
                         "anti-D is offered without a fetal RHD test")
            return
        tests = self.h.of("fetal_rhd")
        if self._typing_item_state(it, tests, "fetal RHD test"):
            if it.state == "done":
                r = tests[-1]["result"]
                it.reason = {"negative": "fetal RHD negative: routine antenatal and event anti-D not needed",
                             "positive": "fetal RHD positive: anti-D prophylaxis as planned",
                             "inconclusive": "fetal RHD inconclusive: managed as RhD positive, anti-D as planned"}[r]
            return
        it.state = _state(self.now, opens, closes, late)
        it.reason = {"not-yet-due": f"a maternal blood sample for the fetal RHD test from {format_ga(o)}",
                     "due": f"take the sample for the fetal RHD test now (from {format_ga(o)}, by {format_ga(c)})",
                     "overdue": f"not sampled by {format_ga(c)}: take it now, the result still guides later anti-D "
                                f"(until {format_ga(l_)})",
                     "missed": f"no fetal RHD test by {format_ga(l_)}: anti-D is given as for an RhD-positive baby"
                     }[it.state]
        if self.rhd["managed_as"] in ("untyped", "retest"):
            it.reason += "; only if she is RhD negative (her typing is not yet known)"

    # -- routine antenatal prophylaxis
    def _routine(self):
        p, tz = self.p, self.tz
        src = p.section_source("routine")
        stop = self._stop_reason()
        fetal_neg = self.fetal["targeted_not_needed"]
        regimen = p.get(f"routine.regimens.{p.regimen}")
        status = self.preg.get("status")
        first_opens = None
        for r in p.routine_doses():
            opens = self.at_ga(r.opens_ga_days)
            closes = _end_of_ga_day(self.dating, r.closes_ga_days, tz)
            late = _end_of_ga_day(self.dating, r.late_until_ga_days, tz)
            if r.number == 1:
                first_opens, first_closes, first_late = opens, closes, late
            it = self.add(code=f"routine-dose-{r.number}", category="routine",
                          title=f"Routine antenatal anti-D {r.number} of {len(p.routine_doses())} ({regimen['title']})",
                          state="due", due=opens, opens=opens, closes=closes, late_until=late, dose_iu=r.dose_iu,
                          reason="", source=src)
            given = self.assigned.get(f"routine:{r.number}")
            window = (f"{r.dose_iu} IU ({calc.iu_to_ug(r.dose_iu):g} µg) from {format_ga(r.opens_ga_days)}, on time until "
                      f"{format_ga(r.closes_ga_days)}, late dose still worth giving until {format_ga(r.late_until_ga_days)}")
            if given:
                self._done(it, given[0], closes)
                it.reason = (f"given {_fmt(given[0]['_t'], tz)} ({given[0]['_iu']} IU)"
                             + ("" if it.timeliness == "on-time" else ", after the window closed"))
                if given[0]["_t"] < opens:
                    it.reason += f", before {format_ga(r.opens_ga_days)}"
                continue
            if stop:
                it.state, it.reason = "not-needed", stop
            elif fetal_neg:
                it.state, it.reason = "not-needed", "cell-free fetal RHD negative: routine antenatal anti-D not needed"
                it.related_id = self.fetal["cffdna_id"]
            elif self.partner_negative and p.get("routine.partner_negative_skips_routine"):
                it.state = "not-needed"
                it.reason = ("the baby's father is RhD negative and paternity is certain: routine antenatal anti-D "
                             "not needed (profile setting routine.partner_negative_skips_routine); give it if she "
                             "chooses to have it")
                it.related_id = self.partner_id
            elif self.born_at and self.born_at < opens:
                it.state, it.reason = "not-needed", "born before this dose was due"
            elif self.born_at:
                it.state, it.reason = "missed", "not given before the birth"
            elif status in ("ended-early",):
                it.state, it.reason = "not-needed", "the pregnancy ended early"
            else:
                it.state = _state(self.now, opens, closes, late)
                it.reason = {"not-yet-due": window, "due": "give now: " + window,
                             "overdue": "the on-time window has closed: give it now, a late dose is still worth giving "
                                        f"(until {format_ga(r.late_until_ga_days)})",
                             "missed": "not given in the window, and the late window has passed"}[it.state]
            if self.rhd["managed_as"] in ("untyped", "retest") and it.state in OPEN_STATES:
                it.reason += "; only if RhD negative (typing not yet known)"
        # the screen sample taken before the (first) routine dose
        if not p.get("pre_dose_screen.required") or first_opens is None:
            return
        src = p.section_source("pre_dose_screen")
        sopens = self.at_ga(p.ga("pre_dose_screen.opens_ga"))
        d1 = self.assigned.get("routine:1")
        limit = d1[0]["_t"] if d1 else None
        it = self.add(code="pre-dose-screen", category="screen",
                      title="Antibody screen before the routine dose", state="due", due=first_opens, opens=sopens,
                      closes=limit or first_closes, late_until=None if limit else first_late, reason="", source=src)
        ok = [s for s in self.h.of("screen") if parse_utc(s["sampled_at"]) >= sopens
              and (limit is None or parse_utc(s["sampled_at"]) <= limit)]
        r1 = self.item("routine-dose-1")
        if r1 is not None and r1.state == "not-needed":
            it.state, it.reason = "not-needed", r1.reason
        elif ok:
            s = ok[0]
            it.state, it.done_record_id, it.done_at = "done", s["id"], parse_utc(s["sampled_at"])
            it.timeliness = "on-time"
            it.reason = "sample taken before the routine dose"
        elif d1:
            it.state, it.reason = "missed", "the routine dose was given before a screen sample was taken"
            it.closes = limit
            self.alert("routine-before-screen", "warning",
                       f"routine anti-D given {_fmt(limit, self.tz)} with no antibody screen sampled from "
                       f"{format_ga(p.ga('pre_dose_screen.opens_ga'))} before it: a later screen may show passive anti-D",
                       src, [d1[0]["id"]])
        elif self.born_at:
            it.state, it.reason = "not-needed" if self.born_at < sopens else "missed", "birth came first"
        else:
            it.state = _state(self.now, sopens, first_closes, first_late)
            it.reason = (f"take the antibody screen sample from {format_ga(p.ga('pre_dose_screen.opens_ga'))}, "
                         f"before giving the first routine dose")

    def item(self, code):
        for i in self.items:
            if i.code == code:
                return i
        return None

    # -- sensitising events
    def _events(self):
        p, tz = self.p, self.tz
        ev = p.get("events")
        hours = timedelta(hours=ev["deadline_hours"])
        late = timedelta(days=ev["late_window_days"])
        fmhs = self.h.of("fmh")
        for e in self.h.of("event"):
            t = self.h.time[e["id"]]
            ga = self.ga_of(e, t)
            try:
                ed = calc.event_dose(e["event_kind"], max(0, min(ga, 44 * 7)), p, products=self.ctx.products,
                                     ongoing=bool(e.get("ongoing")))
            except CareInputError as err:
                raise CareInputError(f"event {e['id']}.{err.field}", err.errors[err.field]) from None
            src, ranges = _event_ga_ranges()
            lo_hi = ranges.get(e["event_kind"])
            if lo_hi and not lo_hi[0] <= ga <= lo_hi[1]:
                self.alert("event-ga-unusual", "warning",
                           f"{_event_words(e)} recorded at {format_ga(ga)}, outside its usual "
                           f"{format_ga(lo_hi[0])} to {format_ga(lo_hi[1])}: check the kind of event and its date "
                           f"(the anti-D dose is still planned)", src, [e["id"]])
            closes, late_until = t + hours, t + late
            code = f"event-dose:{e['id']}"
            it = self.add(code=code, category="event", title=f"Anti-D after {_event_words(e)} at {format_ga(ga)}",
                          state="due", due=t, opens=t, closes=closes, late_until=late_until, dose_iu=ed.dose_iu,
                          related_id=e["id"], reason=ed.reason, source=ed.source)
            given = self.assigned.get(f"event:{e['id']}", [])
            if given:
                self._done(it, given[0], closes)
                total = sum(d["_iu"] for d in given)
                it.reason = f"given {_fmt(given[0]['_t'], tz)} ({given[0]['_iu']} IU)" + (
                    "" if it.timeliness == "on-time" else f", after the {ev['deadline_hours']:g}-hour deadline")
                if ed.dose_iu and total < ed.dose_iu:
                    self.alert("dose-below-required", "warning",
                               f"{total} IU given for the {_event_words(e)} at {format_ga(ga)}; the profile asks for "
                               f"{ed.dose_iu} IU: give the difference", ed.source, [e["id"]] + [d["id"] for d in given])
            elif self._stop_reason():
                it.state, it.reason, it.dose_iu = "not-needed", self._stop_reason(), None
            elif self.fetal["targeted_not_needed"]:
                it.state, it.dose_iu = "not-needed", None
                it.reason = "cell-free fetal RHD negative: anti-D for events not needed"
            elif not ed.needed:
                it.state, it.dose_iu = "not-needed", None
            elif ed.conditional and not e.get("ongoing"):
                it.state, it.dose_iu = "not-needed", None
                it.reason = (f"a single bleed before 12 weeks needs no anti-D unless it is heavy, repeated or with "
                             f"abdominal pain; if so, give {ed.dose_iu if ed.dose_iu else ''} IU and mark the event as "
                             f"continuing")
                self.alert("early-bleeding-check", "warning",
                           f"bleeding at {format_ga(ga)}: a clinician judges whether it was heavy, repeated or with "
                           f"abdominal pain; if so anti-D {p.band_for(ga).dose_iu} IU within "
                           f"{ev['deadline_hours']:g} h is due", ed.source, [e["id"]])
            else:
                it.state = _state(self.now, t, closes, late_until)
                if it.state == "overdue":
                    it.reason = (f"the {ev['deadline_hours']:g}-hour deadline passed at {_fmt(closes, tz)}: give "
                                 f"{ed.dose_iu} IU now, a late dose may still protect (until {_fmt(late_until, tz)})")
                    self.alert("event-dose-overdue", "danger",
                               f"no anti-D after the {_event_words(e)} of {_fmt(t, tz)}: deadline passed, give it now "
                               f"(late window open until {_fmt(late_until, tz)})", ed.source, [e["id"]])
                elif it.state == "missed":
                    it.reason = "no anti-D within the deadline or the late window"
                    self.alert("event-dose-missed", "danger",
                               f"no anti-D was given after the {_event_words(e)} of {_fmt(t, tz)}: the late window closed "
                               f"{_fmt(late_until, tz)}; tell the clinician, screen for antibodies later",
                               ed.source, [e["id"]])
                elif self.rhd["managed_as"] in ("untyped", "retest"):
                    it.reason += "; type the woman now — give only if RhD negative"
                before = [d for k, v in self.assigned.items() if k.startswith("routine:") for d in v if d["_t"] <= t]
                if before and ev["after_routine_dose_needs_own_dose"] and it.state in OPEN_STATES:
                    it.reason += "; the routine dose already given does not cover this event"
            # FMH test for the event
            if ed.fmh_test_required and it.state != "not-needed" and not self._stop_reason():
                fit = self.add(code=f"event-fmh:{e['id']}", category="event",
                               title=f"FMH test after {_event_words(e)} at {format_ga(ga)}", state="due", due=t, opens=t,
                               closes=closes, late_until=late_until, related_id=e["id"],
                               reason="take a sample for an FMH test (Kleihauer-Betke or flow cytometry), ideally before "
                                      "the anti-D, to see whether more anti-D is needed",
                               source=p.section_source("fmh"))
                tests = [f for f in fmhs if f.get("covers_id") == e["id"]] or \
                        [f for f in fmhs if not f.get("covers_id") and t <= parse_utc(f["sampled_at"]) <= late_until]
                self._fmh_done(fit, tests, closes, late_until, t)
            # repeat dosing for ongoing bleeding
            if ed.repeat_every_days and given and it.state == "done":
                last = given[-1]["_t"]
                due = last + timedelta(days=ed.repeat_every_days)
                rit = self.add(code=f"event-repeat:{e['id']}", category="event",
                               title=f"Repeat anti-D for continuing bleeding after {_event_words(e)}", state="due", due=due,
                               opens=due - timedelta(days=7), closes=due + hours, late_until=due + late,
                               dose_iu=ed.repeat_dose_iu, related_id=e["id"],
                               reason=f"continuing bleeding: at least {ed.repeat_dose_iu} IU every "
                                      f"{ed.repeat_every_days // 7} weeks (last {_fmt(last, tz)}), with an FMH test",
                               source=ed.source)
                if self.born_at and self.born_at < due:
                    rit.state, rit.reason = "not-needed", "the baby was born; the postpartum dose follows"
                elif self._stop_reason():
                    rit.state, rit.reason = "not-needed", self._stop_reason()
                else:
                    rit.state = _state(self.now, rit.opens, rit.closes, rit.late_until)

    def _fmh_done(self, it: PlanItem, tests: list[dict], closes, late_until, start):
        quant = [f for f in tests if f["method"] in ("kleihauer-betke", "flow-cytometry")
                 or f.get("rosette_result") == "negative"]
        if quant:
            f = quant[0]
            it.state, it.done_record_id, it.done_at = "done", f["id"], parse_utc(f["sampled_at"])
            it.timeliness = "on-time" if it.done_at <= closes else "late"
            it.reason = "FMH test recorded"
            return
        it.state = _state(self.now, start, closes, late_until)
        if it.state == "overdue":
            it.reason = "no FMH test yet and the deadline has passed: take the sample now"
        elif it.state == "missed":
            it.reason = "no FMH test was recorded"
        if any(f.get("rosette_result") == "positive" for f in tests):
            it.reason = "rosette screen positive: quantify the bleed by Kleihauer-Betke or flow cytometry now"
            self.alert("fmh-rosette-positive", "warning", it.reason, it.source, [f["id"] for f in tests])

    # -- birth
    def _birth_items(self):
        p, tz = self.p, self.tz
        pp = p.get("postpartum")
        src = p.section_source("postpartum")
        edd_at = _midnight(self.dating.edd, tz)
        stop = self._stop_reason()
        if not self.birth:
            status = self.preg.get("status")
            for code, cat, title in (("cord-typing", "birth", "Cord blood RhD typing and DAT at birth"),
                                     ("postpartum-dose", "postpartum", "Anti-D after birth")):
                it = self.add(code=code, category=cat, title=title, state="not-yet-due", due=edd_at, reason="",
                              source=src, dose_iu=pp["dose_iu"] if code == "postpartum-dose" else None)
                if status == "ended-early":
                    it.state, it.reason, it.dose_iu = "not-needed", "the pregnancy ended early", None
                elif code == "postpartum-dose" and stop:
                    it.state, it.reason, it.dose_iu = "not-needed", stop, None
                else:
                    it.reason = ("at birth: cord blood for the baby's RhD group and DAT" if code == "cord-typing" else
                                 f"if the baby is RhD positive or not known: {pp['dose_iu']} IU "
                                 f"({calc.iu_to_ug(pp['dose_iu']):g} µg) within {pp['deadline_hours']:g} hours of birth")
            return
        b, born = self.birth, self.born_at
        closes = born + timedelta(hours=pp["deadline_hours"])
        late = born + timedelta(days=pp["late_window_days"])
        rhds = [x.get("baby_rhd") for x in self.births]
        ids = [x["id"] for x in self.births]
        cord = self.add(code="cord-typing", category="birth", title="Cord blood RhD typing and DAT", state="due",
                        due=born, opens=born, closes=closes, late_until=None, related_id=b["id"], reason="",
                        source=src)
        if all(r in ("positive", "negative") for r in rhds):
            cord.state, cord.done_record_id, cord.done_at, cord.timeliness = "done", b["id"], born, "on-time"
            cord.reason = "baby RhD " + ", ".join(rhds) + (f"; DAT {b.get('dat')}" if b.get("dat") else "")
        else:
            cord.state = "due" if self.now <= closes else "missed"
            cord.reason = ("the baby's RhD group is not known: type the cord or baby blood; until then the mother's "
                           "dose is due")
        if any(x.get("dat") == "positive" for x in self.births):
            self.alert("baby-dat-positive", "warning",
                       "the baby's DAT is positive: after antenatal anti-D this may be passive antibody; it does not by "
                       "itself cancel the mother's postpartum dose — a clinician decides; check the baby for "
                       "jaundice and anaemia", src, ids)
        it = self.add(code="postpartum-dose", category="postpartum", title="Anti-D after birth", state="due", due=born,
                      opens=born, closes=closes, late_until=late, dose_iu=pp["dose_iu"], related_id=b["id"],
                      reason="", source=src)
        given = self.assigned.get("postpartum", [])
        baby_neg = all(r == "negative" for r in rhds)
        if given:
            self._done(it, given[0], closes)
            it.reason = f"given {_fmt(given[0]['_t'], tz)} ({given[0]['_iu']} IU)" + (
                "" if it.timeliness == "on-time" else f", after {pp['deadline_hours']:g} hours")
            if baby_neg:
                self.alert("postpartum-dose-baby-negative", "info",
                           "a postpartum dose was recorded although the baby is RhD negative", src,
                           [given[0]["id"]])
            total = sum(d["_iu"] for d in given)
            if total < pp["dose_iu"]:
                self.alert("dose-below-required", "warning",
                           f"{total} IU given after birth; the profile asks for at least {pp['dose_iu']} IU", src,
                           [d["id"] for d in given])
        elif stop:
            it.state, it.reason, it.dose_iu = "not-needed", stop, None
        elif baby_neg:
            it.state, it.dose_iu = "not-needed", None
            it.reason = "the baby is RhD negative: no anti-D needed"
        else:
            why = "the baby is RhD positive" if all(r == "positive" for r in rhds) else \
                "the baby's RhD group is not known (not tested" + (
                    ", stillbirth" if any(x.get("outcome") == "stillbirth" for x in self.births) else "") + ")"
            it.state = _state(self.now, born, closes, late)
            it.reason = {
                "due": f"{why}: give {pp['dose_iu']} IU ({calc.iu_to_ug(pp['dose_iu']):g} µg) by {_fmt(closes, tz)}",
                "overdue": f"{why}: the {pp['deadline_hours']:g}-hour deadline passed at {_fmt(closes, tz)}; give it "
                           f"now — a late dose may still protect (until {_fmt(late, tz)})",
                "missed": f"{why}: no dose within {pp['deadline_hours']:g} hours or the late window "
                          f"(closed {_fmt(late, tz)})",
                "not-yet-due": why}[it.state]
            if it.state == "overdue":
                self.alert("postpartum-dose-overdue", "danger", "postpartum anti-D not given: " + it.reason, src,
                           [b["id"]])
            elif it.state == "missed":
                self.alert("postpartum-dose-missed", "danger", "postpartum anti-D missed: " + it.reason
                           + "; tell the clinician and screen for antibodies at 6 months", src, [b["id"]])
        if pp["fmh_test_required"] and it.state != "not-needed" and not stop:
            fit = self.add(code="postpartum-fmh", category="postpartum", title="FMH test after birth", state="due",
                           due=born, opens=born, closes=closes, late_until=late, related_id=b["id"],
                           reason="take the mother's sample for an FMH test after birth (before the anti-D where "
                                  "possible) to see whether more anti-D is needed",
                           source=p.section_source("fmh"))
            fmhs = self.h.of("fmh")
            tests = [f for f in fmhs if f.get("covers_id") in ids] or \
                    [f for f in fmhs if not f.get("covers_id") and parse_utc(f["sampled_at"]) >= born]
            self._fmh_done(fit, tests, closes, late, born)

    # -- more anti-D when the FMH test shows a large bleed
    def _fmh_extra(self):
        p, tz = self.p, self.tz
        events = {e["id"]: e for e in self.h.of("event")}
        birth_ids = {b["id"] for b in self.births}
        if self._stop_reason():
            return  # sensitised: more anti-D no longer helps
        for f in self.h.of("fmh"):
            if f["method"] not in ("kleihauer-betke", "flow-cytometry"):
                continue
            target = f.get("covers_id")
            ft = parse_utc(f["sampled_at"])
            if target is None:
                if self.born_at and ft >= self.born_at:
                    target = self.birth["id"]
                else:
                    late = timedelta(days=p.get("events.late_window_days"))
                    c = [e for e in events.values() if self.h.time[e["id"]] <= ft <= self.h.time[e["id"]] + late]
                    target = c[-1]["id"] if c else None
            if target is None or (target not in events and target not in birth_ids):
                continue
            mbv = f.get("maternal_volume_ml") or self.ctx.maternal_blood_volume_ml
            try:
                res = calc.fmh_result(profile=p, fetal_cells=f.get("fetal_cells") if "fetal_cell_percent" not in f else None,
                                      cells_counted=f.get("cells_counted") if "fetal_cell_percent" not in f else None,
                                      fetal_cell_percent=f.get("fetal_cell_percent"), maternal_volume_ml=mbv,
                                      vial_sizes_iu=[x.vial_iu for x in self.ctx.products])
            except CareInputError as err:
                self.alert("fmh-unreadable", "warning", f"FMH test {f['id']} cannot be used: {err}",
                           p.section_source("fmh"), [f["id"]])
                continue
            is_birth = target in birth_ids
            key = "postpartum" if is_birth else f"event:{target}"
            base_item = self.item("postpartum-dose" if is_birth else f"event-dose:{target}")
            if base_item is None or base_item.state == "not-needed":
                continue
            std = base_item.dose_iu or 0
            if res["dose_iu"] <= std:
                continue
            given = sum(d["_iu"] for d in self.assigned.get(key, []))
            code = "postpartum-fmh-dose" if is_birth else f"event-fmh-dose:{target}"
            if self.item(code):
                continue
            t0 = self.born_at if is_birth else self.h.time[target]
            sec = "postpartum" if is_birth else "events"
            closes = t0 + timedelta(hours=p.get(f"{sec}.deadline_hours"))
            late = t0 + timedelta(days=p.get(f"{sec}.late_window_days"))
            more = max(res["dose_iu"] - given, 0)
            self.fmh_need[key] = max(self.fmh_need.get(key, 0), res["dose_iu"])
            it = self.add(code=code, category="postpartum" if is_birth else "event",
                          title="Further anti-D for a large fetomaternal haemorrhage", state="due", due=ft, opens=ft,
                          closes=max(closes, ft), late_until=max(late, ft), dose_iu=more or res["dose_iu"],
                          related_id=target,
                          reason=(f"FMH {res['fetal_red_cells_ml']:g} mL fetal red cells ({res['working']}): "
                                  f"{res['dose_iu']} IU needed in all, {given} IU given so far"),
                          source=res["source"])
            if more == 0:
                ds = self.assigned.get(key, [])
                self._done(it, ds[-1], it.closes)
                it.dose_iu = res["dose_iu"]
            else:
                it.state = _state(self.now, ft, it.closes, it.late_until)
                for w in res["warnings"]:
                    self.alert("fmh-large-im", "warning", w, res["source"], [f["id"]])
                self.alert("fmh-large", "danger",
                           f"large fetomaternal haemorrhage: {more} IU more anti-D needed; repeat the FMH test "
                           f"after giving it (48 h IM / 24-48 h IV per local protocol)", res["source"], [f["id"]])

    def _not_needed_note(self):
        """Managed as RhD positive: show the prophylaxis items as not needed, with why."""
        reason = self.rhd["reason"]
        src = self.p.section_source("rhd")
        for r in self.p.routine_doses():
            self.add(code=f"routine-dose-{r.number}", category="routine", title=f"Routine antenatal anti-D {r.number}",
                     state="not-needed", reason=reason, source=src)
        for e in self.h.of("event"):
            self.add(code=f"event-dose:{e['id']}", category="event", title=f"Anti-D after {_event_words(e)}",
                     state="not-needed", reason=reason, source=src, related_id=e["id"])
        self.add(code="postpartum-dose", category="postpartum", title="Anti-D after birth", state="not-needed",
                 reason=reason, source=src, related_id=self.birth["id"] if self.birth else None)

    # -- surveillance (antibodies found)
    def _surveillance(self):
        from clinic.care.surveillance import surveillance_items
        surveillance_items(self)

    # -- alerts over all doses
    def _dose_alerts(self):
        p, tz = self.p, self.tz
        src = p.section_source("routine")
        fm = p.get("fmh")
        sizes = [x.vial_iu for x in self.ctx.products] or [fm["default_vial_iu"]]
        for d in self.doses:
            if self.rhd["managed_as"] == "positive":
                self.alert("dose-rhd-positive", "danger",
                           f"anti-D recorded ({d['_iu']} IU, {_fmt(d['_t'], tz)}) for a woman managed as RhD positive "
                           f"({self.rhd['reason']}): check the typing and the record", p.section_source("rhd"),
                           [d["id"], self.rhd.get("record_id")])
            if self.ab.immune_at is not None and d["_t"] > self.ab.immune_at:
                self.alert("dose-after-sensitisation", "warning",
                           f"anti-D given {_fmt(d['_t'], tz)} after immune anti-D was found "
                           f"({_fmt(self.ab.immune_at, tz)}): prophylaxis no longer helps; check with the clinician",
                           p.section_source("antibody"), [d["id"], self.ab.immune_id])
            allowed = self._allowed_iu(d, sizes)
            if allowed is not None and d["_iu"] > allowed:
                self.alert("dose-above-allowed", "warning",
                           f"{d['_iu']} IU given {_fmt(d['_t'], tz)} is more than the {allowed} IU this profile allows "
                           f"for {d['indication']} (without an FMH result asking for more): check the record",
                           src, [d["id"]])
            if d.get("route") == "IM" and d["_iu"] > fm["max_im_iu_at_once"]:
                self.alert("dose-large-im", "warning",
                           f"{d['_iu']} IU IM at once is more than {fm['max_im_iu_at_once']} IU: an IV product should "
                           f"be considered for large doses", p.section_source("fmh"), [d["id"]])

    def _allowed_iu(self, d: dict, sizes) -> int | None:
        key = next((k for k, v in self.assigned.items() if d in v), None)
        if key is None:
            return None
        std = 0
        if key.startswith("routine:"):
            std = max(r.dose_iu for r in self.p.routine_doses())
        elif key == "postpartum":
            std = self.p.get("postpartum.dose_iu")
        elif key.startswith("event:"):
            it = self.item(f"event-dose:{key[6:]}")
            band = self.p.band_for(self.dating.ga_days(d["_t"], self.tz) if it is None else
                                   max(0, min(44 * 7, self._event_ga(key[6:]))))
            std = max(band.dose_iu, self.p.get("events.repeat_dose_iu"))
        std = max(std, self.fmh_need.get(key, 0))
        whole = min(calc.vials_for(std, v) * v for v in sizes)
        return max(std, whole)

    def _event_ga(self, eid: str) -> int:
        for e in self.h.of("event"):
            if e["id"] == eid:
                return self.ga_of(e, self.h.time[eid])
        return 0

    # -- pathway
    def _pathway(self) -> str:
        status = self.preg.get("status")
        if status in ("transferred", "lost-to-follow-up"):
            return "ended"
        managed = self.rhd["managed_as"]
        if self.ab.surveillance:
            path = "surveillance"
        elif managed == "positive":
            path = "not-needed"
        elif managed == "retest":
            path = "retest"
        elif managed == "untyped":
            path = "untyped"
        else:
            path = "prophylaxis"
        if status in ("delivered", "ended-early") and not any(i.state in OPEN_STATES for i in self.items):
            return "ended"
        return path

