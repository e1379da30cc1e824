"""Red cell antibodies on the screens: is an anti-D passive (from prophylaxis) or immune?

Immune anti-D, or any other red cell antibody, puts the pregnancy on the surveillance pathway
(surveillance.py) and stops anti-D prophylaxis.
"""
from __future__ import annotations

from datetime import datetime, timedelta
from typing import Any

from clinic.care.codes import AlertCode
from clinic.care.model import Alert
from clinic.care.planning.core import Antibodies, Dose, History, Record
from clinic.care.protocol import Profile
from clinic.records.values import parse_utc


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
        for name in s.get("antibodies") or []:
            titre = s.get("titre") if s.get("titre_antibody") == name else None
            finding: dict[str, Any] = {
                "screen_id": s["id"], "antibody": name if name != "other" else (s.get("antibody_other") or "other"),
                "sampled_at": s["sampled_at"], "titre": titre, "origin": None}
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
                    alerts.append(Alert(AlertCode.ANTI_D_UNDETERMINED, "warning",
                                        "anti-D found after recent prophylaxis without a titre or quantitation: ask "
                                        "the laboratory to quantify; prophylaxis continues until it is shown to be "
                                        "immune", src, [s["id"]]))
            else:
                finding["origin"] = "immune"
                finding["reason"] = "red cell antibody other than anti-D: surveillance for HDFN"
                out.surveillance = True
            out.findings.append(finding)
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
