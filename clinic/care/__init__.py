"""The care engine: pure clinical rules and calculations (no Flask, no storage).

    from clinic.care import load_profile, list_profiles, plan_pregnancy, CareContext
    profile = load_profile("bsh-2014", overrides={"routine.regimen": "single"})
    plan = plan_pregnancy(woman, pregnancy, entries, now=aware_dt, profile=profile, context=CareContext(...))
    plan.to_dict()

Decision support only: every dose it proposes must be confirmed against the product label
and local protocol by a licensed clinician.
"""
import importlib

# Names are loaded on first use (PEP 562): clinic.records.validate imports clinic.care.ga,
# and the engine imports clinic.records.validate, so this package must not import the engine
# eagerly.
_EXPORTS = {
    "calc": ("EventDose", "event_dose", "fetal_hb_median", "fetal_hb_mom", "fetal_hb_result", "fetal_hb_severity",
             "fetal_rhd_probability", "fmh_dose_iu", "fmh_result", "fmh_volume", "hadlock_efw", "iu_to_ug",
             "iut_volume", "mca_psv_median", "mca_psv_mom", "mca_result", "mca_severity", "nadler_blood_volume_ml",
             "ug_to_iu", "vials_for"),
    "dating": ("Dating", "choose_dating", "edd_from_lmp", "edd_naegele_calendar", "ga_days_from_crl", "ga_from_crl",
               "ga_on", "redate_threshold_days"),
    "errors": ("CareError", "CareInputError", "ProfileError"),
    "ga": ("GAFormatError", "format_ga", "parse_ga"),
    "model": ("Alert", "CareContext", "Plan", "PlanItem"),
    "plan": ("plan_pregnancy",),
    "protocol": ("Profile", "list_profiles", "load_profile"),
    "surveillance": ("antibody_risk", "titre_rise"),
}
_WHERE = {name: mod for mod, names in _EXPORTS.items() for name in names}

CAUTION = ("Decision support only: confirm every dose against the product label and local protocol, "
           "and defer to licensed clinicians and local regulations.")

__all__ = sorted([*_WHERE, "CAUTION"])


def __getattr__(name):
    mod = _WHERE.get(name)
    if mod is None:
        raise AttributeError(f"module 'clinic.care' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"clinic.care.{mod}"), name)
    globals()[name] = value
    return value


def __dir__():
    return __all__
