"""Red cell antibodies on the screens: which antibody, is it clinically significant, and is an
anti-D passive (from prophylaxis) or immune?

Immune anti-D stops anti-D prophylaxis; it, and any other clinically significant antibody (the
profile's ``antibody.clinically_significant``), puts the pregnancy on the surveillance pathway
(surveillance.py). An antibody the profile lists as not clinically significant is noted and not
followed. A positive screen that names no antibody, or one of unknown significance, is left
for identification (identification.py opens the task).
"""
from __future__ import annotations

from datetime import datetime, timedelta
from typing import Any

from clinic.care.codes import AlertCode
from clinic.care.model import Alert
from clinic.care.planning.core import Antibodies, Dose, History, Record
from clinic.care.protocol import Profile
from clinic.records.values import parse_utc


def antibody_name(text: str | None) -> str | None:
    """A laboratory's antibody name in the profile's spelling: "Jk(a)", "anti Jka" -> "anti-Jka";
    None for no name. Case is kept: anti-c and anti-C are different antibodies."""
    if text is None:
        return None
    t = " ".join(str(text).split()).replace("(", "").replace(")", "")
    if not t:
        return None
    low = t.lower()
    for prefix in ("anti-", "anti ", "anti"):
        if low.startswith(prefix):
            t = t[len(prefix):].strip(" -")
            break
    return f"anti-{t}" if t else None


def significance(name: str | None, profile: Profile) -> str:
    """"significant", "not-significant" or "unknown" by the profile's antibody lists (a name
    matched without regard to case only where that match is unambiguous)."""
    if name is None:
        return "unknown"
    lists = (("significant", profile.get("antibody.clinically_significant")),
             ("not-significant", profile.get("antibody.not_clinically_significant")))
    for word, names in lists:
        if name in names:
            return word
    loose = [word for word, names in lists for n in names if n.lower() == name.lower()]
    return loose[0] if len(loose) == 1 else "unknown"


def judge_antibodies(h: History, doses: list[Dose], profile: Profile, alerts: list[Alert]) -> Antibodies:
    ab = profile.get("antibody")
    src = profile.section_source("antibody")
    out = Antibodies()
    immune_alert: Alert | None = None
    window = timedelta(days=ab["passive_window_days"])
    for s in h.of("screen"):
        if s.get("result") != "positive":
            continue
        t = parse_utc(s["sampled_at"])
        named = s.get("antibodies") or []
        unknown: list[str] = []
        if not named:
            unknown.append("no antibody is named on it")
        for raw in named:
            name = antibody_name(s.get("antibody_other")) if raw == "other" else raw
            titre = s.get("titre") if s.get("titre_antibody") == raw else None
            finding: dict[str, Any] = {
                "screen_id": s["id"], "antibody": name or "other", "sampled_at": s["sampled_at"], "titre": titre,
                "origin": None, "significance": significance(name, profile)}
            if name == "anti-D":
                origin, why = _anti_d_origin(s, t, titre, [d for d in doses if t - window <= d.at <= t],
                                             profile, alerts)
                finding["iu_ml"] = s.get("anti_d_iu_ml")
                finding["origin"], finding["reason"] = origin, why
                if origin == "immune":
                    if out.immune_at is None:
                        out.immune_at, out.immune_id = t, s["id"]
                        # one alert for the pregnancy; record_ids: the first immune screen, then any later ones
                        immune_alert = Alert(AlertCode.IMMUNE_ANTI_D, "danger",
                                             f"immune anti-D found on {s['sampled_at'][:10]} ({why}): the woman is "
                                             f"sensitised; anti-D prophylaxis stops and the pregnancy follows the "
                                             f"surveillance pathway", src, [s["id"]])
                        alerts.append(immune_alert)
                    elif immune_alert is not None and s["id"] not in immune_alert.record_ids:
                        immune_alert.record_ids.append(s["id"])
                    out.surveillance = True
                elif origin == "probable-passive":
                    alerts.append(Alert(AlertCode.ANTI_D_PASSIVE, "info",
                                        f"anti-D found on {s['sampled_at'][:10]}: {why}; prophylaxis continues "
                                        f"(a clinician confirms)", src, [s["id"]]))
                elif origin == "undetermined":
                    out.undetermined.append(s["id"])
                    alerts.append(Alert(AlertCode.ANTI_D_UNDETERMINED, "warning",
                                        "anti-D found after recent prophylaxis without a titre or quantitation: ask "
                                        "the laboratory to quantify; prophylaxis continues until it is shown to be "
                                        "immune", src, [s["id"]]))
            elif finding["significance"] == "significant":
                finding["origin"] = "immune"
                finding["reason"] = f"{name}, a clinically significant red cell antibody: surveillance for HDFN"
                out.surveillance = True
            elif finding["significance"] == "not-significant":
                finding["origin"] = "not-significant"
                finding["reason"] = f"{name} is not clinically significant in pregnancy (profile): not followed"
                alerts.append(Alert(AlertCode.ANTIBODY_NOT_SIGNIFICANT, "info",
                                    f"{name} on the screen of {s['sampled_at'][:10]} is not clinically significant "
                                    f"in pregnancy: no titres or surveillance for it; the planned screens "
                                    f"continue, and anti-D prophylaxis is unchanged", src, [s["id"]]))
            else:
                finding["origin"] = "unknown"
                what = (f"{name} is not known to this profile as clinically significant or not" if name else
                        "an antibody recorded as 'other' has no name")
                finding["reason"] = what + ": identify it"
                unknown.append(what)
            out.findings.append(finding)
        if unknown:
            out.unidentified[s["id"]] = "; ".join(unknown)
    return out


def _anti_d_origin(s: Record, t: datetime, titre: int | None, recent: list[Dose], profile: Profile,
                   alerts: list[Alert]) -> tuple[str, str]:
    """(origin, why) of an anti-D on screen ``s``: the laboratory's judgement where recorded
    (with a warning when the doses given say otherwise), else judged from the level and the
    anti-D given in the passive window before it (``recent``)."""
    ab = profile.get("antibody")
    src = profile.section_source("antibody")
    iu = s.get("anti_d_iu_ml")
    rec = s.get("anti_d_origin")
    low = ((iu is not None and iu <= ab["passive_max_iu_ml"]) or
           (iu is None and titre is not None and titre <= ab["passive_max_titre"]))
    known_level = iu is not None or titre is not None
    if rec == "immune":
        if recent and known_level and low:
            alerts.append(Alert(AlertCode.ANTI_D_ORIGIN_CHECK, "warning",
                                f"the laboratory judged the anti-D of {s['sampled_at'][:10]} immune, "
                                f"although anti-D was given {(t - recent[-1].at).days} days before and "
                                f"the level is low (it could be passive): the laboratory's judgement is "
                                f"used; a clinician confirms", src, [s["id"]]))
        return "immune", "recorded by the laboratory as immune"
    if rec == "passive":
        if not recent:
            alerts.append(Alert(AlertCode.ANTI_D_ORIGIN_CHECK, "warning",
                                f"the laboratory judged the anti-D of {s['sampled_at'][:10]} passive, but "
                                f"no anti-D is recorded in the {ab['passive_window_days']} days before the "
                                f"sample: record any dose given elsewhere or ask the laboratory to review; "
                                f"treated as passive meanwhile", src, [s["id"]]))
        return "passive", "recorded by the laboratory as passive"
    if not recent:
        return "immune", (f"no anti-D recorded in the {ab['passive_window_days']} days before the "
                          f"sample, so not passive (record any anti-D given elsewhere)")
    if known_level and low:
        return "probable-passive", f"anti-D given {(t - recent[-1].at).days} days before, low level: probably passive"
    if known_level:
        return "immune", (f"level above the passive limits (≤ {ab['passive_max_iu_ml']} IU/mL or "
                          f"titre ≤ 1:{ab['passive_max_titre']}) despite recent anti-D")
    return "undetermined", "anti-D given recently but no titre or quantitation recorded"
