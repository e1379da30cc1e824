"""What the printed card and the referral note show, as plain dicts for the templates.

Built from stored-shape records (woman, pregnancy, entries), the care engine's plan as a
dict (``Plan.to_dict()``, optional) and the card text. Everything a person reads is
worked out here, so the templates only lay it out.
"""
from __future__ import annotations

from datetime import date, datetime, timezone, tzinfo
from typing import Any

from clinic.care import CAUTION
from clinic.care.calc import bleeding_words, iu_to_ug, ug_to_iu
from clinic.care.codes import OPEN_STATES
from clinic.care.dating import ga_on
from clinic.records.choices import (
    DAT_NOT_RECORDED,
    DAT_WORDS,
    FETAL_RHD_WORDS,
    INDICATION_WORDS,
    RHD_WORDS,
    event_words,
    plain_words,
)
from clinic.records.values import format_ga, parse_utc

SENSITISED_LINE = "Antibody present \u2013 refer"
STATE_WORDS = {"overdue": "OVERDUE", "due": "due now", "not-yet-due": "due"}


def show_date(v: str | None) -> str:
    """'2026-11-20' or a UTC time -> '20 Nov 2026' (month in letters: no day/month mix-up)."""
    if not v:
        return ""
    d = date.fromisoformat(v[:10])
    return d.strftime("%d %b %Y").lstrip("0")


def show_time(v: str | None, tz: tzinfo) -> str:
    if not v:
        return ""
    t = parse_utc(v).astimezone(tz)
    return t.strftime("%d %b %Y %H:%M").lstrip("0")


def local_date(v: str | None, tz: tzinfo) -> str:
    if not v:
        return ""
    if len(v) == 10:
        return v
    return parse_utc(v).astimezone(tz).date().isoformat()


def ga_at(day_iso: str, edd: str | None) -> int | None:
    if not edd or not day_iso:
        return None
    return ga_on(day_iso[:10], edd=edd)


def _ga_text(rec: dict, day: str, edd: str | None) -> str:
    days = rec.get("ga_days")
    if days is None:
        days = ga_at(day, edd)
        if days is None or not 0 <= days <= 320:
            return ""
    return format_ga(int(days))


def ug_text(iu: float) -> str:
    return f"{iu_to_ug(iu):g}"


def is_sensitised(entries: list[dict]) -> bool:
    """A positive screen naming an antibody other than anti-D, or anti-D not judged passive."""
    for s in entries:
        if s.get("kind") != "screen" or s.get("voided") or s.get("result") != "positive":
            continue
        abs_ = s.get("antibodies") or []
        if not abs_ or any(a != "anti-D" for a in abs_):
            return True
        if s.get("anti_d_origin") != "passive":
            return True
    return False


def _latest(entries, kind):
    of = [e for e in entries if e.get("kind") == kind and not e.get("voided")]
    key = {"typing": "tested_on", "partner_typing": "tested_on", "fetal_rhd": "sampled_on"}[kind]
    of.sort(key=lambda r: (r.get(key) or "", r.get("created_at") or ""))
    return of[-1] if of else None


def _carried(plan: dict, tz: tzinfo) -> tuple[list[dict], list[dict]]:
    """A missed dose of this pregnancy, with what follows, and what earlier pregnancies hand on
    (the plan's ``missed_doses`` and ``earlier``), as lines the card and the note print."""
    missed = []
    for m in plan.get("missed_doses") or []:
        when = show_date(local_date(m.get("occurred_at"), tz))
        if m.get("screen_id"):
            then = "The follow-up antibody screen is taken (see the screens); tell the booking midwife next time."
        else:
            then = (f"Antibody screen from {show_date(m.get('screen_from'))} and at the booking of her next "
                    f"pregnancy.")
        missed.append({"title": m["title"], "when": when, "line": f"{m['title']} ({when}) was not given. {then}",
                       "follow_up": m.get("follow_up", "")})
    earlier = []
    for e in plan.get("earlier") or []:
        which = ", ".join(x for x in (f"booked {show_date(e.get('booked_on'))}" if e.get("booked_on") else "",
                                      f"birth {show_date(e.get('ended_on'))}" if e.get("ended_on") else "") if x)
        lines = []
        if e.get("missed"):
            lines.append("anti-D missed: " + "; ".join(e["missed"]) + ". Antibody screen at this booking.")
        if e.get("antibodies"):
            lines.append("antibody found: " + "; ".join(e["antibodies"]) + ". Screen now, with a titre.")
        if e.get("problem"):
            lines.append("its record could not be read by the care engine: check it.")
        if lines:
            earlier.append({"which": f"Earlier pregnancy ({which})" if which else "Earlier pregnancy",
                            "lines": lines})
    return missed, earlier


def _carried_line(plan: dict) -> str:
    """One line for the front of the card when something travels with her (the back says what)."""
    earlier = plan.get("earlier") or []
    if any(e.get("antibodies") for e in earlier):
        return "Antibody in an earlier pregnancy \u2013 see the back"
    if plan.get("missed_doses") or any(e.get("missed") for e in earlier):
        return "Anti-D missed \u2013 see the back"
    return ""


def build_view(woman: dict, pregnancy: dict, entries: list[dict], *, plan: dict | None = None,
               issuer: dict, issue: int, issued_at: str, card_code: str = "", qr_text: str = "",
               qr_version: int | None = None, omitted: int = 0, tz: tzinfo = timezone.utc,
               now: datetime | None = None) -> dict[str, Any]:
    """The card's content for a person to read."""
    live = [e for e in entries if not e.get("voided")]
    edd = (plan or {}).get("dating", {}).get("edd") or pregnancy.get("edd")
    t = _latest(live, "typing")
    blood = None
    if t:
        variant = ""
        if t["rhd"] == "weak-d":
            variant = f"Weak D{(' type ' + t['weak_d_type']) if t.get('weak_d_type') else ''}"
        elif t["rhd"] == "partial-d":
            variant = f"Partial D{(' ' + t['partial_d_category']) if t.get('partial_d_category') else ''}"
        managed = (plan or {}).get("rhd", {}).get("managed_as")
        blood = {"abo": t["abo"] if t["abo"] != "unknown" else "ABO ?", "rhd": RHD_WORDS.get(t["rhd"], t["rhd"]),
                 "variant": variant, "tested_on": show_date(t.get("tested_on")), "lab": t.get("lab", ""),
                 "managed_as": (RHD_WORDS.get(managed, "") if managed and t["rhd"] not in ("positive", "negative")
                                else "")}
    pt = _latest(live, "partner_typing")
    fr = _latest(live, "fetal_rhd")
    screens = [{"date": show_time(s["sampled_at"], tz)[:-6], "ga": _ga_text(s, local_date(s["sampled_at"], tz), edd),
                "result": s["result"], "antibodies": ", ".join(s.get("antibodies") or []) +
                (f" ({s['antibody_other']})" if s.get("antibody_other") else ""),
                "titre": f"1:{s['titre']}" if s.get("titre") else "",
                "quant": f"{s['anti_d_iu_ml']:g} IU/mL" if s.get("anti_d_iu_ml") is not None else "",
                "origin": s.get("anti_d_origin", "")}
               for s in sorted((e for e in live if e["kind"] == "screen"), key=lambda r: r["sampled_at"])]
    events = [{"date": show_time(e["occurred_at"], tz), "ga": _ga_text(e, local_date(e["occurred_at"], tz), edd),
               "what": event_words(e["event_kind"]).capitalize(),
               "ongoing": bool(e.get("ongoing")), "notes": e.get("notes", ""),
               "details": ", ".join(x for x in (bleeding_words(e), "continuing" if e.get("ongoing") else "") if x)}
              for e in sorted((x for x in live if x["kind"] == "event"), key=lambda r: r["occurred_at"])]
    doses = []
    for d in sorted((x for x in live if x["kind"] == "dose"), key=lambda r: r["given_at"]):
        iu = d.get("dose_iu") or (ug_to_iu(d["amount"]) if d["unit"] == "ug" else d["amount"])
        doses.append({"date": show_time(d["given_at"], tz), "ga": _ga_text(d, local_date(d["given_at"], tz), edd),
                      "ug": ug_text(iu), "iu": f"{int(round(iu))}", "route": d["route"], "lot": d["lot"],
                      "why": INDICATION_WORDS.get(d["indication"], d["indication"]), "product": d.get("product", "")})
    births = [{"date": show_time(b["born_at"], tz), "ga": _ga_text(b, local_date(b["born_at"], tz), edd),
               "outcome": plain_words(b["outcome"]),
               "baby": " ".join(x for x in ((b.get("baby_abo") or "") if b.get("baby_abo") != "unknown" else "",
                                            RHD_WORDS.get(b["baby_rhd"], b["baby_rhd"])) if x),
               "dat": DAT_WORDS.get(b.get("dat") or "", DAT_NOT_RECORDED)}
              for b in sorted((x for x in live if x["kind"] == "birth"), key=lambda r: r["born_at"])]
    actions = []
    for it in (plan or {}).get("items", []):
        if it.get("state") not in OPEN_STATES:
            continue
        dose = ""
        if it.get("dose_iu"):
            dose = f"{ug_text(it['dose_iu'])} µg / {it['dose_iu']} IU"
        actions.append({"title": it["title"], "due": show_date(local_date(it.get("due"), tz)) if it.get("due") else "",
                        "closes": show_date(local_date(it.get("closes"), tz)) if it.get("closes") else "",
                        "state": it["state"], "state_words": STATE_WORDS[it["state"]], "dose": dose,
                        "sort": it.get("due") or "9999"})
    actions.sort(key=lambda a: a["sort"])
    missed, earlier = _carried(plan or {}, tz)
    referrals = [{"date": show_date(r["referred_on"]), "to": r["to_facility"], "reason": r["reason"],
                  "question": r.get("question", "")}
                 for r in sorted((x for x in live if x["kind"] == "referral"), key=lambda r: r["referred_on"])]
    age = ""
    if woman.get("birth_date"):
        bd = date.fromisoformat(woman["birth_date"])
        ref = (now or datetime.now(timezone.utc)).astimezone(tz).date()
        years = ref.year - bd.year - ((ref.month, ref.day) < (bd.month, bd.day))
        age = f"{show_date(woman['birth_date'])} ({years} y)"
    elif woman.get("stated_age") is not None:
        age = f"age {woman['stated_age']} (stated)"
    return {
        "woman": {"name": woman.get("name", ""), "born": age, "register_no": woman.get("register_no", ""),
                  "village": woman.get("village", "")},
        "pregnancy": {"edd": show_date(edd), "booked_on": show_date(pregnancy.get("booked_on")),
                      "gravidity": pregnancy.get("gravidity"), "parity": pregnancy.get("parity"),
                      "status": pregnancy.get("status", ""), "id": pregnancy.get("id", ""),
                      "prior_sensitising": pregnancy.get("prior_sensitising", ""),
                      "prior_anti_d": pregnancy.get("prior_anti_d", "")},
        "blood": blood,
        "partner": ({"rhd": RHD_WORDS.get(pt["rhd"], pt["rhd"]),
                     "abo": pt.get("abo", "") if pt.get("abo") != "unknown" else "",
                     "zygosity": pt.get("rhd_zygosity", "") if pt.get("rhd_zygosity") != "unknown" else ""}
                    if pt else None),
        "fetal": ({"result": FETAL_RHD_WORDS[fr["result"]],
                   "date": show_date(fr["sampled_on"]), "ga": _ga_text(fr, fr["sampled_on"], edd)} if fr else None),
        "sensitised": is_sensitised(live),
        "sensitised_line": SENSITISED_LINE,
        "screens": screens, "events": events, "doses": doses, "births": births, "actions": actions,
        "missed": missed, "earlier": earlier, "referrals": referrals, "carried_line": _carried_line(plan or {}),
        "issuer": {"name": issuer.get("name", ""), "phone": issuer.get("phone", ""),
                   "facility_id": issuer.get("facility_id", "")},
        "issue": issue, "issued": show_date(local_date(issued_at, tz)), "issued_at": issued_at,
        "card_code": card_code, "qr_text": qr_text, "qr_version": qr_version, "omitted": omitted,
        "caution": (plan or {}).get("caution") or CAUTION,
        "base_caution": CAUTION,
    }
