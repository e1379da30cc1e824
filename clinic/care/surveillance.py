"""The surveillance pathway: a woman with red cell antibodies (immune anti-D, anti-c, anti-K ...).

Titres and quantitation against the profile's critical levels, the titre trend, follow-up
intervals, referral, MCA Doppler (Mari 2000 MoM) and fetal Hb. Every next step is a
suggestion with its source, for a specialist to decide.
"""
from __future__ import annotations

import math
from datetime import date, datetime, timedelta
from typing import TYPE_CHECKING, Any

from clinic.care import calc
from clinic.care.codes import AlertCode, ItemCode
from clinic.care.formatting import format_against
from clinic.records.values import parse_utc

if TYPE_CHECKING:
    from clinic.care.planning.core import Planner
    from clinic.care.protocol import Profile

# Alert severity for the fetal anaemia class of an MCA-PSV or fetal Hb result.
ANAEMIA_ALERT_SEVERITY = {"none": "info", "mild": "warning", "moderate": "danger", "severe": "danger"}


def antibody_risk(name: str, titre: int | None, iu_ml: float | None, profile: Profile) -> dict[str, Any]:
    """Is this antibody level critical (refer)? By quantitation where the profile uses it, else titre."""
    s = profile.get("surveillance")
    crit = s["critical_titre"].get(name, s["critical_titre"]["other"])
    q = s["quantitation"].get(name) if s["use_quantitation"] else None
    if q is not None and iu_ml is not None:
        level = format_against(iu_ml, (q["moderate_iu_ml"], q["high_iu_ml"]), 1, trim=True, note=False)
        if iu_ml > q["high_iu_ml"]:
            return {"critical": True, "level": "high", "by": "quantitation",
                    "text": f"{name} {level} IU/mL, above {q['high_iu_ml']:g}: high risk of HDFN — refer urgently"}
        if iu_ml >= q["moderate_iu_ml"]:
            return {"critical": True, "level": "moderate", "by": "quantitation",
                    "text": f"{name} {level} IU/mL ({q['moderate_iu_ml']:g} to {q['high_iu_ml']:g}): moderate "
                            f"risk — refer to fetal medicine"}
        return {"critical": False, "level": "low", "by": "quantitation",
                "text": f"{name} {level} IU/mL, below {q['moderate_iu_ml']:g}: low risk — keep monitoring"}
    if crit <= 1:
        return {"critical": True, "level": "any", "by": "presence",
                "text": f"{name} at any titre: refer to fetal medicine (the profile refers on detection)"}
    if titre is None:
        return {"critical": False, "level": "unknown", "by": "none",
                "text": f"{name} found without a titre: ask the laboratory for a titre"}
    if titre >= crit:
        return {"critical": True, "level": "critical", "by": "titre",
                "text": f"{name} titre 1:{titre}, at or above the critical titre 1:{crit}: refer to fetal medicine"}
    return {"critical": False, "level": "below-critical", "by": "titre",
            "text": f"{name} titre 1:{titre}, below the critical titre 1:{crit}: repeat titres"}


def titre_rise(previous: int, latest: int, dilutions: int) -> bool:
    """A rise of ``dilutions`` doubling dilutions or more (2 = four-fold) is significant."""
    return latest > 0 and previous > 0 and math.log2(latest / previous) >= dilutions - 1e-9


def surveillance_items(pl: Planner) -> None:
    """Titres until a critical level, then referral and MCA Doppler; alerts on every result."""
    p, tz, now = pl.p, pl.tz, pl.now
    s = p.get("surveillance")
    src = p.section_source("surveillance")
    findings = [f for f in (pl.ab.findings or []) if f["origin"] == "immune"]
    if not findings:
        return
    by_ab: dict[str, list[dict]] = {}
    for f in findings:
        by_ab.setdefault(f["antibody"], []).append(f)
    critical_at: datetime | None = None
    critical_ids: list[str] = []
    last_sample: datetime | None = None
    no_level: list[tuple[datetime, str]] = []   # antibodies whose latest screen has no titre or quantitation
    for name, fs in sorted(by_ab.items()):
        fs.sort(key=lambda f: (f["sampled_at"], f["screen_id"]))
        latest = fs[-1]
        risk = antibody_risk(name, latest.get("titre"), latest.get("iu_ml"), p)
        latest["risk"] = risk
        t = parse_utc(latest["sampled_at"])
        last_sample = t if last_sample is None or t > last_sample else last_sample
        if risk["level"] == "unknown":
            no_level.append((t, name))
        for f in fs:
            r = antibody_risk(name, f.get("titre"), f.get("iu_ml"), p)
            if r["critical"]:
                ft = parse_utc(f["sampled_at"])
                if critical_at is None or ft < critical_at:
                    critical_at = ft
                critical_ids.append(f["screen_id"])
                break
        pl.alert(AlertCode.ANTIBODY_FOUND if not risk["critical"] else AlertCode.ANTIBODY_CRITICAL,
                 "warning" if not risk["critical"] else "danger", risk["text"], src, [latest["screen_id"]])
        titres = [(f["sampled_at"], f["titre"], f["screen_id"]) for f in fs if f.get("titre")]
        if len(titres) >= 2:
            (_, a, ida), (_, b, idb) = titres[-2], titres[-1]
            if titre_rise(a, b, s["significant_rise_dilutions"]):
                rise = format_against(math.log2(b / a), s["significant_rise_dilutions"], 0, note=False)
                pl.alert(AlertCode.TITRE_RISE, "warning",
                         f"{name} titre rose from 1:{a} to 1:{b} ({rise} dilutions): a rise of "
                         f"{s['significant_rise_dilutions']} dilutions or more is significant — discuss with fetal "
                         f"medicine", src, [ida, idb])
    born = pl.born_at
    # repeat titres / quantitation until critical
    if critical_at is None and last_sample is not None:
        ga_last = pl.dating.ga_days(last_sample, tz)
        change = pl.at_ga(p.ga("surveillance.interval_change_ga"))
        if ga_last < p.ga("surveillance.interval_change_ga"):
            due = min(last_sample + timedelta(days=s["titre_interval_days_early"]),
                      max(change, last_sample + timedelta(days=s["titre_interval_days_late"])))
        else:
            due = last_sample + timedelta(days=s["titre_interval_days_late"])
        opens, closes = due - timedelta(days=3), due + timedelta(days=7)
        first_level = ""
        if no_level:
            # A clinically significant antibody found without a level: the first titre or
            # quantitation is due now, not at the next interval (BSH 2016, White et al.).
            due = opens = min(t for t, _ in no_level)
            closes = due + timedelta(days=p.get("antibody.identify_within_days"))
            first_level = (f"no titre or quantitation yet for {', '.join(n for _, n in sorted(no_level))}: ask the "
                           f"laboratory to titre or quantify it now; then ")
        it = pl.add(ItemCode.SURVEILLANCE_TITRE, "Repeat antibody titre / quantitation", "due", "", src,
                    due=due, opens=opens, closes=closes, late_until=None)
        if born:
            it.state, it.reason = "not-needed", "the baby is born; follow the baby for HDFN"
        else:
            it.state = _open_state(now, opens, closes)
            it.reason = (f"{first_level}repeat every {s['titre_interval_days_early'] // 7} weeks until "
                         f"{p.get('surveillance.interval_change_ga')}, then every "
                         f"{s['titre_interval_days_late'] // 7} weeks "
                         f"(last sample {last_sample.astimezone(tz):%Y-%m-%d})")
    elif critical_at is not None:
        closes = critical_at + timedelta(days=7)
        it = pl.add(ItemCode.SURVEILLANCE_REFERRAL, "Referral to fetal medicine", "due",
                    "critical antibody level: refer to a fetal medicine unit (common practice: within a week)", src,
                    due=critical_at, opens=critical_at, closes=closes, late_until=None)
        refs = [r for r in pl.h.of("referral")
                if date.fromisoformat(r["referred_on"]) >= critical_at.astimezone(tz).date()]
        if refs:
            done_at = pl.h.time[refs[0]["id"]]
            it.state, it.done_record_id, it.done_at = "done", refs[0]["id"], done_at
            it.timeliness = "on-time" if done_at <= closes else "late"
            it.reason = f"referred to {refs[0].get('to_facility')}"
        elif born:
            it.state, it.reason = "not-needed", "the baby is born"
        else:
            it.state = _open_state(now, critical_at, closes)
        # titres are no longer the guide once critical
        pl.add(ItemCode.SURVEILLANCE_TITRE, "Repeat antibody titre / quantitation", "not-needed",
               "the critical level is reached: MCA Doppler, not titres, guides care", src)
        opens = max(critical_at, pl.at_ga(p.ga("surveillance.doppler_from_ga")))
        dops = [d for d in pl.h.of("doppler") if parse_utc(d["measured_at"]) >= critical_at]
        interval = timedelta(days=s["doppler_interval_days"])
        due = parse_utc(dops[-1]["measured_at"]) + interval if dops else opens
        dopens, dcloses = min(due, max(opens, due - timedelta(days=2))), due + interval
        dit = pl.add(ItemCode.SURVEILLANCE_DOPPLER, "MCA Doppler (peak systolic velocity)", "due", "", src,
                     due=due, opens=dopens, closes=dcloses, late_until=None)
        if born:
            dit.state, dit.reason = "not-needed", "the baby is born"
        else:
            dit.state = _open_state(now, dopens, dcloses)
            dit.reason = (f"MCA-PSV every {s['doppler_interval_days']} days from "
                          f"{p.get('surveillance.doppler_from_ga')} (suggestion for the fetal medicine team)")
        if not born:
            pl.alert(AlertCode.DELIVERY_TIMING, "info", f"suggestion for the specialist: {s['delivery_text']}", src,
                     critical_ids[:1])
    # latest Doppler and fetal blood results
    dops = pl.h.of("doppler")
    if dops:
        d = dops[-1]
        t = parse_utc(d["measured_at"])
        ga = pl.ga_of(d, t)
        if calc.MCA_GA_MIN_DAYS <= ga <= calc.MCA_GA_MAX_DAYS:
            r = calc.mca_result(d["mca_psv_cm_s"], ga, p)
            sev = ANAEMIA_ALERT_SEVERITY[r["severity"]]
            pl.alert(AlertCode.MCA_PSV, sev, f"MCA-PSV {r['psv_cm_s']:g} cm/s at {r['ga']} = {r['mom_text']} MoM "
                                     f"(median {r['median_cm_s']:.1f}; {r['severity']}): {r['suggestion']}",
                     r["source"], [d["id"]])
            dop = pl.item(ItemCode.SURVEILLANCE_DOPPLER)
            if dop is not None and dop.state != "not-needed" and dop.opens is not None:
                dop.reason += f"; last {r['mom_text']} MoM — {r['suggestion']}"
                if r["severity"] != "none" and dop.due is not None:
                    # From the mild threshold up the next Doppler is due within one interval,
                    # not within the usual two: the deadline is the due date itself.
                    dop.closes = dop.due
                    dop.state = _open_state(now, dop.opens, dop.due)
    fbs = [f for f in pl.h.of("fbs") if f.get("hb_g_dl") is not None]
    if fbs:
        f = fbs[-1]
        t = parse_utc(f["sampled_at"])
        ga = pl.ga_of(f, t)
        if calc.HB_GA_MIN_DAYS <= ga <= calc.HB_GA_MAX_DAYS:
            r = calc.fetal_hb_result(f["hb_g_dl"], ga, p)
            sev = ANAEMIA_ALERT_SEVERITY[r["severity"]]
            pl.alert(AlertCode.FETAL_HB, sev, f"fetal Hb {r['hb_g_dl']:g} g/dL at {r['ga']} = {r['mom_text']} MoM "
                                      f"({r['severity']} anaemia by Mari 2000 classes): for the fetal medicine team",
                     r["source"], [f["id"]])
    if born and pl.birth:
        pl.alert(AlertCode.NEONATAL_FOLLOW_UP, "warning",
                 "maternal red cell antibodies: check the baby's DAT, Hb and bilirubin after birth (HDFN risk)",
                 src, [pl.birth["id"]])


def _open_state(now: datetime, opens: datetime, closes: datetime) -> str:
    if now < opens:
        return "not-yet-due"
    if now <= closes:
        return "due"
    return "overdue"
