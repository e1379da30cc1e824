"""The calculators of the web page and GET /api/v1/calc/<name>: thin over clinic.care.

Each calculator lists its inputs (named as the care function's fields, so an error lands
next to its input) and a function that calls the care engine. Inputs arrive as text;
gestational ages as weeks+days. Errors are raised as ValidationError (field -> message).
"""
from __future__ import annotations

from datetime import date

from clinic.care import CAUTION  # noqa: F401 - the caution of the dose calculators (api.py)
from clinic.care.errors import CareError, CareInputError
from clinic.records.schema import EVENT_KINDS
from clinic.records.validate import ValidationError
from clinic.records.values import GAFormatError, format_ga, parse_ga
from clinic.web.clock import now_local
from clinic.web.db import get_profile, get_settings


def _inp(name, label, type="number", *, required=True, min=None, max=None, step="any", choices=(),
         default=None, help=""):
    return {"name": name, "label": label, "type": type, "required": required, "min": min, "max": max,
            "step": step, "choices": tuple(choices), "default": default, "help": help}


GA = dict(type="ga", help="weeks+days, e.g. 28+3")


def _num(args, name, *, required=True, integer=False):
    v = (args.get(name) or "").strip()
    if not v:
        if required:
            raise CareInputError(name, "is required")
        return None
    try:
        x = float(v.replace(",", "."))
    except ValueError:
        raise CareInputError(name, f"{v!r} is not a number") from None
    if integer:
        if x != int(x):
            raise CareInputError(name, "must be a whole number")
        return int(x)
    return x


def _ga(args, name="ga_days", required=True):
    v = (args.get(name) or "").strip()
    if not v:
        if required:
            raise CareInputError(name, "is required (weeks+days, e.g. 28+3)")
        return None
    try:
        return parse_ga(v)
    except GAFormatError as e:
        raise CareInputError(name, str(e)) from None


def _choice(args, name, choices, default=None):
    v = (args.get(name) or "").strip() or default
    if v not in choices:
        raise CareInputError(name, f"{v!r} is not one of: {', '.join(choices)}")
    return v


_YES = ("yes", "on", "true", "1")
_NO = ("no", "off", "false", "0")


def _yes_no(args, name, default: bool | None) -> bool | None:
    """A yes/no input (a checkbox sends "on"); empty: ``default``; anything else is refused."""
    v = (args.get(name) or "").strip().lower()
    if not v:
        return default
    if v in _YES:
        return True
    if v in _NO:
        return False
    raise CareInputError(name, f"{v!r} is not yes or no")


# Dates a calculator accepts: far beyond any pregnancy, far inside what date arithmetic can hold.
DATE_MIN, DATE_MAX = date(1900, 1, 1), date(2199, 12, 31)


def _date(args, name):
    v = (args.get(name) or "").strip()
    if not v:
        return None
    try:
        d = date.fromisoformat(v)
    except ValueError:
        raise CareInputError(name, f"{v!r} is not a date (YYYY-MM-DD)") from None
    if not DATE_MIN <= d <= DATE_MAX:
        raise CareInputError(name, f"{v} is outside the dates a calculator works with "
                                   f"({DATE_MIN.isoformat()} to {DATE_MAX.isoformat()})")
    return d


def run_mca(args):
    from clinic.care.calc import mca_result

    return mca_result(_num(args, "psv_cm_s"), _ga(args), get_profile())


def run_fetal_hb(args):
    from clinic.care.calc import fetal_hb_result

    return fetal_hb_result(_num(args, "hb_g_dl"), _ga(args), get_profile())


def run_fmh(args):
    from clinic.care.calc import fmh_result

    s = get_settings()
    pct = _num(args, "fetal_cell_percent", required=False)
    kw = {"fetal_cell_percent": pct} if pct is not None else {
        "fetal_cells": _num(args, "fetal_cells", required=True, integer=True),
        "cells_counted": _num(args, "cells_counted", required=True, integer=True)}
    mbv = _num(args, "maternal_volume_ml", required=False)
    if mbv is None:  # empty: the facility's figure (a 0 typed in is refused by the range check)
        mbv = s.maternal_blood_volume_ml
    return fmh_result(profile=get_profile(), maternal_volume_ml=mbv,
                      route=_choice(args, "route", ("IM", "IV"), "IM"),
                      vial_sizes_iu=tuple(p.vial_iu for p in s.products), **kw)


def run_event_dose(args):
    from clinic.care.calc import event_dose

    kind = _choice(args, "kind", EVENT_KINDS)
    ongoing = bool(_yes_no(args, "ongoing", False))
    # Not answered (left out) is not "no": the dose is then proposed on the condition.
    facts = {name: _yes_no(args, name, None) for name in ("bleeding_heavy", "bleeding_repeated", "abdominal_pain")}
    return event_dose(kind, _ga(args), get_profile(), products=get_settings().products, ongoing=ongoing, **facts)


def run_fetal_rhd(args):
    from clinic.care.calc import fetal_rhd_probability

    freq = _num(args, "rhd_negative_frequency", required=False)
    if freq is None:
        freq = get_settings().rhd_negative_frequency
    fetal = (args.get("fetal_rhd") or "").strip() or None
    return fetal_rhd_probability(
        rhd_negative_frequency=freq,
        partner_rhd=_choice(args, "partner_rhd", ("positive", "negative", "unknown"), "unknown"),
        partner_zygosity=_choice(args, "partner_zygosity", ("homozygous", "heterozygous", "unknown"), "unknown"),
        paternity_certain=_yes_no(args, "paternity_certain", True),
        fetal_rhd=fetal)


def run_blood_volume(args):
    from clinic.care.calc import nadler_blood_volume_ml

    ml = nadler_blood_volume_ml(_num(args, "height_cm"), _num(args, "weight_kg"), "female")
    return {"blood_volume_ml": round(ml), "source": "Nadler SB, Hidalgo JU, Bloch T. Surgery 1962;51:224-232"}


def run_iut(args):
    from clinic.care.calc import hadlock_efw, iut_volume

    efw = _num(args, "efw_g", required=False)
    if efw is None:
        if not any((args.get(k) or "").strip() for k in ("hc_cm", "ac_cm", "fl_cm")):
            raise CareInputError("efw_g", "give the estimated fetal weight, or HC, AC and FL to estimate it")
        efw = hadlock_efw(_num(args, "hc_cm"), _num(args, "ac_cm"), _num(args, "fl_cm"))
    return iut_volume(efw, _num(args, "fetal_hct"), _num(args, "target_hct"), _num(args, "donor_hct"))


def run_units(args):
    from clinic.care.calc import iu_to_ug, ug_to_iu

    amount = _num(args, "amount")
    unit = _choice(args, "unit", ("ug", "IU"), "ug")
    if amount <= 0:
        raise CareInputError("amount", f"{amount:g} must be above 0")
    iu = ug_to_iu(amount) if unit == "ug" else amount
    out = {"dose_iu": round(iu, 2), "dose_ug": round(iu_to_ug(iu), 3),
           "source": "1 µg = 5 IU (WHO International Standard; BSH 2014)"}
    out["vials_by_product"] = []
    from clinic.care.calc import vials_for

    for p in get_settings().products:
        n = vials_for(iu, p.vial_iu)
        out["vials_by_product"].append({"product": p.name, "vial_iu": p.vial_iu, "vials": n})
    return out


def run_dating(args):
    """EDD and GA today from LMP / dating scan / agreed EDD, by the profile's dating rule."""
    from clinic.care.dating import choose_dating, profile_thresholds

    prof = get_profile()
    crl = _num(args, "scan_crl_mm", required=False)
    sga = _ga(args, "scan_ga_days", required=False)
    scan_on = _date(args, "scan_on")
    if (crl is not None or sga is not None) and scan_on is None:
        raise CareInputError("scan_on", "is required with a scan measurement")
    d = choose_dating(lmp=_date(args, "lmp"), scan_on=scan_on, scan_crl_mm=crl, scan_ga_days=sga,
                      agreed_edd=_date(args, "edd"), rule=prof.get("dating.rule"), thresholds=profile_thresholds(prof),
                      source=prof.section_source("dating"))
    on = _date(args, "booked_on") or now_local().date()
    today = now_local().date()
    ga_today = (today - d.origin).days
    return {"edd": d.edd.isoformat(), "method": d.method, "reason": d.reason, "source": d.source,
            "ga_today_days": ga_today, "ga_today": format_ga(ga_today),
            "ga_at_booking": format_ga((on - d.origin).days), "note": d.reason}


CALCULATORS: dict[str, dict] = {
    "dating": {"title": "Dating: EDD and GA", "run": run_dating, "inputs": (
        _inp("lmp", "LMP (first day)", "date", required=False),
        _inp("scan_on", "Dating scan date", "date", required=False),
        _inp("scan_crl_mm", "CRL (mm)", required=False, min=3, max=84),
        _inp("scan_ga_days", "GA by scan", required=False, **GA),
        _inp("edd", "Agreed EDD", "date", required=False))},
    "event-dose": {"title": "Anti-D for a sensitising event", "dose": True, "run": run_event_dose, "inputs": (
        _inp("kind", "Event", "choice", choices=EVENT_KINDS),
        _inp("ga_days", "GA at the event", **GA),
        _inp("bleeding_heavy", "Bleeding is heavy", "bool", required=False),
        _inp("bleeding_repeated", "Bleeding is repeated", "bool", required=False),
        _inp("abdominal_pain", "With abdominal pain", "bool", required=False),
        _inp("ongoing", "Bleeding continues", "bool", required=False))},
    "fmh": {"title": "FMH (Kleihauer-Betke / flow) and anti-D dose", "dose": True, "run": run_fmh, "inputs": (
        _inp("fetal_cells", "Fetal cells counted", required=False, min=0, step="1"),
        _inp("cells_counted", "Total cells counted", required=False, min=100, step="1"),
        _inp("fetal_cell_percent", "or fetal cells (%)", required=False, min=0, max=100),
        _inp("maternal_volume_ml", "Maternal blood volume (mL)", required=False, min=2000, max=10000,
             help="empty: the facility's default"),
        _inp("route", "Route", "choice", choices=("IM", "IV"), default="IM"))},
    "units": {"title": "µg ⇄ IU and vials", "dose": True, "run": run_units, "inputs": (
        _inp("amount", "Amount", min=0.000001),
        _inp("unit", "Unit", "choice", choices=("ug", "IU"), default="ug"))},
    "mca": {"title": "MCA-PSV in MoM", "run": run_mca, "inputs": (
        _inp("psv_cm_s", "MCA-PSV (cm/s)", min=5, max=150),
        _inp("ga_days", "GA", **GA))},
    "fetal-hb": {"title": "Fetal Hb in MoM", "run": run_fetal_hb, "inputs": (
        _inp("hb_g_dl", "Fetal Hb (g/dL)", min=1, max=25),
        _inp("ga_days", "GA", **GA))},
    "fetal-rhd": {"title": "Chance the baby is RhD positive", "run": run_fetal_rhd, "inputs": (
        _inp("partner_rhd", "Baby's father RhD", "choice", choices=("positive", "negative", "unknown"),
             default="unknown"),
        _inp("partner_zygosity", "Father's RHD zygosity", "choice", choices=("homozygous", "heterozygous", "unknown"),
             default="unknown"),
        _inp("paternity_certain", "Paternity certain", "choice", choices=("yes", "no"), default="yes"),
        _inp("fetal_rhd", "Cell-free fetal RHD", "choice", required=False,
             choices=("positive", "negative", "inconclusive")),
        _inp("rhd_negative_frequency", "RhD-negative frequency", required=False, min=0.001, max=0.999,
             help="empty: the facility's figure"))},
    "blood-volume": {"title": "Maternal blood volume (Nadler)", "run": run_blood_volume, "inputs": (
        _inp("height_cm", "Height (cm)", min=120, max=220),
        _inp("weight_kg", "Weight (kg)", min=30, max=250))},
    "iut": {"title": "Intrauterine transfusion volume", "run": run_iut, "inputs": (
        _inp("efw_g", "Estimated fetal weight (g)", required=False, min=200, max=5000),
        _inp("hc_cm", "or HC (cm)", required=False, min=5, max=45),
        _inp("ac_cm", "AC (cm)", required=False, min=5, max=50),
        _inp("fl_cm", "FL (cm)", required=False, min=1, max=10),
        _inp("fetal_hct", "Fetal Hct (%)", min=5, max=75),
        _inp("target_hct", "Target Hct (%)", min=5, max=75),
        _inp("donor_hct", "Donor Hct (%)", min=50, max=90, default=80))},
}


def run(name: str, args) -> dict:
    """Run a calculator on text inputs; ValidationError names the field and its range."""
    try:
        out = CALCULATORS[name]["run"](args)
    except CareInputError as e:
        raise ValidationError(e.errors) from None
    except CareError as e:
        raise ValidationError({"_calc": str(e)}) from None
    except OverflowError:  # a result beyond year 9999 from inputs each in range
        raise ValidationError({"_calc": "the inputs give a date outside the calendar; check them"}) from None
    if hasattr(out, "to_dict"):
        out = out.to_dict()
    return out
