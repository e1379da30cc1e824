"""The care engine: pure clinical rules and calculations (no Flask, no storage).

    from clinic.care import load_profile, list_profiles, plan_pregnancy, CareContext
    profile = load_profile("bsh-2014", overrides={"routine.regimen": "single"})
    plan = plan_pregnancy(woman, pregnancy, entries, now=aware_dt, profile=profile, context=CareContext(...),
                          earlier=[summarise_earlier(old_pregnancy, old_entries, old_plan)])
    plan.to_dict()

An installation plans from its settings with ``clinic.care_inputs.plan_from_settings``.
Gestational-age text ("30+2") is ``clinic.records.values``.

Decision support only: every dose it proposes must be confirmed against the product label
and local protocol by a licensed clinician.
"""
from clinic.care.calc import (
    EventDose,
    event_dose,
    fetal_hb_median,
    fetal_hb_mom,
    fetal_hb_result,
    fetal_hb_severity,
    fetal_rhd_probability,
    fmh_dose_iu,
    fmh_result,
    fmh_volume,
    hadlock_efw,
    iu_to_ug,
    iut_volume,
    mca_psv_median,
    mca_psv_mom,
    mca_result,
    mca_severity,
    nadler_blood_volume_ml,
    ug_to_iu,
    vials_for,
)
from clinic.care.dating import (
    Dating,
    choose_dating,
    edd_from_lmp,
    edd_naegele_calendar,
    ga_days_from_crl,
    ga_from_crl,
    ga_on,
    redate_threshold_days,
)
from clinic.care.errors import CareError, CareInputError, ProfileError
from clinic.care.model import Alert, CareContext, EarlierPregnancy, MissedDose, Plan, PlanItem, Product
from clinic.care.plan import plan_pregnancy
from clinic.care.planning.carried import summarise_earlier
from clinic.care.protocol import Profile, list_profiles, load_profile
from clinic.care.surveillance import antibody_risk, titre_rise

CAUTION = ("Decision support only: confirm every dose against the product label and local protocol, "
           "and defer to licensed clinicians and local regulations.")

__all__ = [
    "CAUTION", "Alert", "CareContext", "CareError", "CareInputError", "Dating", "EarlierPregnancy", "EventDose",
    "MissedDose", "Plan", "PlanItem", "Product", "Profile", "ProfileError", "antibody_risk", "choose_dating",
    "edd_from_lmp", "edd_naegele_calendar",
    "event_dose", "fetal_hb_median", "fetal_hb_mom", "fetal_hb_result", "fetal_hb_severity", "fetal_rhd_probability",
    "fmh_dose_iu", "fmh_result", "fmh_volume", "ga_days_from_crl", "ga_from_crl", "ga_on", "hadlock_efw", "iu_to_ug",
    "iut_volume", "list_profiles", "load_profile", "mca_psv_median", "mca_psv_mom", "mca_result", "mca_severity",
    "nadler_blood_volume_ml", "plan_pregnancy", "redate_threshold_days", "summarise_earlier", "titre_rise",
    "ug_to_iu", "vials_for",
]
