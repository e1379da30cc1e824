"""Calculators: plain functions the plan, the web calculator page, the card and the CLI call.

Published formulas live here with their papers named; protocol values (doses, thresholds,
rounding rules) come from the profile passed in, never from constants here.
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

from clinic.care.errors import CareInputError, require_range
from clinic.care.formatting import format_against, round_against, threshold_text
from clinic.records.choices import event_words
from clinic.records.schema import EVENT_KINDS, IU_PER_UG
from clinic.records.values import format_ga

_EPS = 1e-9

# ---- units -------------------------------------------------------------------------------

def iu_to_ug(iu: float) -> float:
    """1 µg = 5 IU (WHO International Standard; BSH 2014, Qureshi et al.)."""
    return iu / IU_PER_UG


def ug_to_iu(ug: float) -> float:
    return ug * IU_PER_UG


def _num(x: float) -> float:
    """Round a displayed figure to 4 significant decimals, keeping it a number."""
    return float(round(x, 4))


def _num_against(x: float, thresholds: tuple[float, ...]) -> float:
    """As ``_num``, with more decimals where 4 would put the figure on or across a threshold."""
    return float(round_against(x, thresholds, 4))


# ---- MCA peak systolic velocity (Mari et al., NEJM 2000;342:9-14) -------------------------

MCA_GA_MIN_DAYS = 15 * 7       # the reference starts at 18 weeks; 15-17 weeks is extrapolated
MCA_GA_MAX_DAYS = 40 * 7 + 6


def _ga_weeks(ga_days, lo: int, hi: int, field_name: str = "ga_days") -> float:
    d = require_range(field_name, ga_days, lo, hi, unit="days")
    if d != int(d):
        raise CareInputError(field_name, "must be whole days")
    return d / 7.0


def mca_psv_median(ga_days) -> float:
    """Median MCA-PSV in cm/s: e^(2.31 + 0.046 * GA weeks) (Mari et al. 2000)."""
    w = _ga_weeks(ga_days, MCA_GA_MIN_DAYS, MCA_GA_MAX_DAYS)
    return math.exp(2.31 + 0.046 * w)


def mca_psv_mom(psv_cm_s, ga_days) -> float:
    psv = require_range("psv_cm_s", psv_cm_s, 5, 150, unit="cm/s")
    return psv / mca_psv_median(ga_days)


def mca_severity(mom: float, profile) -> str:
    """none / mild / moderate / severe by the profile's MoM thresholds (Mari 2000: 1.29, 1.50, 1.55)."""
    s = profile.get("surveillance")
    if mom >= s["mca_mom_severe"] - _EPS:
        return "severe"
    if mom >= s["mca_mom_moderate"] - _EPS:
        return "moderate"
    if mom >= s["mca_mom_mild"] - _EPS:
        return "mild"
    return "none"


def mca_result(psv_cm_s, ga_days, profile) -> dict:
    med = mca_psv_median(ga_days)
    mom = mca_psv_mom(psv_cm_s, ga_days)
    sev = mca_severity(mom, profile)
    s = profile.get("surveillance")
    refer = mom >= s["mca_refer_mom"] - _EPS
    cuts = (s["mca_mom_mild"], s["mca_mom_moderate"], s["mca_mom_severe"], s["mca_refer_mom"])
    text = format_against(mom, cuts)
    if refer:
        step = (f"MCA-PSV {text} MoM is at or above {threshold_text(s['mca_refer_mom'])} MoM: suggest referral for "
                f"fetal blood sampling and possible intrauterine transfusion (for a specialist to decide)")
    elif sev == "mild":
        step = "MCA-PSV in the mild range: suggest repeating the Doppler within 1 week (for a specialist to decide)"
    else:
        step = ("MCA-PSV below the anaemia thresholds: suggest repeating the Doppler in 1-2 weeks "
                "(for a specialist to decide)")
    return {
        "ga_days": int(ga_days), "ga": format_ga(int(ga_days)), "psv_cm_s": _num(float(psv_cm_s)),
        "median_cm_s": _num(med), "mom": _num_against(mom, cuts), "mom_text": text, "severity": sev,
        "threshold_mild_cm_s": _num(med * s["mca_mom_mild"]),
        "threshold_moderate_cm_s": _num(med * s["mca_mom_moderate"]),
        "threshold_severe_cm_s": _num(med * s["mca_mom_severe"]),
        "refer": refer, "suggestion": step,
        "extrapolated": int(ga_days) < 18 * 7,
        "source": "Mari G et al., NEJM 2000;342:9-14: median MCA-PSV = e^(2.31 + 0.046 x GA weeks); "
                  "thresholds from profile " + profile.id,
    }


# ---- fetal haemoglobin (Mari et al. 2000 reference, as used by SMFM Clinical Guideline 8, 2015) --

# Median fetal Hb (g/dL) by week, 18-40: Mari et al. NEJM 2000;342:9-14, reference values of
# median haemoglobin by week (paper Tables 1 and 3, read in a published reproduction);
# the values agree to 0.1 g/dL with Mari's regression median = e^(2.84 - 8.55 / GA weeks).
# Corrected 2026-12 from values written from memory (e.g. 28 weeks was 12.4, table 12.6).
# Values between the listed weeks are interpolated linearly.
FETAL_HB_MEDIAN_G_DL = {
    18: 10.6, 20: 11.1, 22: 11.6, 24: 12.0, 26: 12.3, 28: 12.6,
    30: 12.8, 32: 13.1, 34: 13.3, 36: 13.5, 38: 13.6, 40: 13.8,
}
HB_GA_MIN_DAYS = 18 * 7
HB_GA_MAX_DAYS = 40 * 7


def fetal_hb_median(ga_days) -> float:
    w = _ga_weeks(ga_days, HB_GA_MIN_DAYS, HB_GA_MAX_DAYS)
    keys = sorted(FETAL_HB_MEDIAN_G_DL)
    for a, b in zip(keys, keys[1:], strict=False):
        if a <= w <= b:
            ya, yb = FETAL_HB_MEDIAN_G_DL[a], FETAL_HB_MEDIAN_G_DL[b]
            return ya + (yb - ya) * (w - a) / (b - a)
    return FETAL_HB_MEDIAN_G_DL[keys[-1]]  # pragma: no cover - range checked above


def fetal_hb_mom(hb_g_dl, ga_days) -> float:
    hb = require_range("hb_g_dl", hb_g_dl, 1, 25, unit="g/dL")
    return hb / fetal_hb_median(ga_days)


def fetal_hb_severity(mom: float, profile) -> str:
    """none / mild / moderate / severe: below 0.84, 0.65, 0.55 MoM (Mari 2000; thresholds from the profile)."""
    s = profile.get("surveillance")
    if mom < s["hb_mom_severe"] - _EPS:
        return "severe"
    if mom < s["hb_mom_moderate"] - _EPS:
        return "moderate"
    if mom < s["hb_mom_mild"] - _EPS:
        return "mild"
    return "none"


def fetal_hb_result(hb_g_dl, ga_days, profile) -> dict:
    med = fetal_hb_median(ga_days)
    mom = fetal_hb_mom(hb_g_dl, ga_days)
    s = profile.get("surveillance")
    cuts = (s["hb_mom_mild"], s["hb_mom_moderate"], s["hb_mom_severe"])
    return {
        "ga_days": int(ga_days), "ga": format_ga(int(ga_days)), "hb_g_dl": _num(float(hb_g_dl)),
        "median_g_dl": _num(med), "mom": _num_against(mom, cuts), "mom_text": format_against(mom, cuts),
        "severity": fetal_hb_severity(mom, profile),
        "source": "Mari G et al., NEJM 2000;342:9-14, reference median fetal Hb by week of gestation; "
                  "thresholds 0.84/0.65/0.55 MoM from profile " + profile.id,
    }


# ---- fetomaternal haemorrhage -----------------------------------------------------------

def nadler_blood_volume_ml(height_cm, weight_kg, sex: str = "female") -> float:
    """Blood volume (mL), Nadler SB, Hidalgo JU, Bloch T. Surgery 1962;51:224-232.

    women: 0.3561 H^3 + 0.03308 W + 0.1833 (L; H in m, W in kg); men: 0.3669 H^3 + 0.03219 W + 0.6041.
    """
    h = require_range("height_cm", height_cm, 120, 220, unit="cm") / 100.0
    w = require_range("weight_kg", weight_kg, 30, 250, unit="kg")
    if sex == "female":
        litres = 0.3561 * h ** 3 + 0.03308 * w + 0.1833
    elif sex == "male":
        litres = 0.3669 * h ** 3 + 0.03219 * w + 0.6041
    else:
        raise CareInputError("sex", f"{sex!r} is not one of: female, male")
    return litres * 1000.0


def fmh_volume(*, fetal_cells=None, cells_counted=None, fetal_cell_percent=None,
               maternal_volume_ml=5000.0, fetal_hct=0.5, correction=1.0) -> dict:
    """Estimated bleed: fetal whole blood (mL) = fetal cell fraction x maternal blood volume x correction;
    fetal red cells = whole blood x fetal Hct (ACOG PB 181: 30 mL whole blood = 15 mL red cells)."""
    mbv = require_range("maternal_volume_ml", maternal_volume_ml, 2000, 10000, unit="mL")
    if fetal_cell_percent is not None:
        if fetal_cells is not None or cells_counted is not None:
            raise CareInputError("fetal_cell_percent",
                                 "give either counts (fetal cells and cells counted) or the %, not both")
        frac = require_range("fetal_cell_percent", fetal_cell_percent, 0, 100, unit="%") / 100.0
    else:
        if fetal_cells is None or cells_counted is None:
            raise CareInputError("fetal_cells", "give fetal cells and cells counted, or the fetal cell %")
        n = require_range("cells_counted", cells_counted, 100, 1_000_000)
        f = require_range("fetal_cells", fetal_cells, 0, n)
        if f != int(f) or n != int(n):
            raise CareInputError("fetal_cells", "cell counts must be whole numbers")
        frac = f / n
    whole = frac * mbv * correction
    return {"fetal_cell_fraction": frac, "maternal_volume_ml": mbv,
            "fetal_whole_blood_ml": whole, "fetal_red_cells_ml": whole * fetal_hct}


def vials_for(dose_iu, vial_iu) -> int:
    """Whole vials that cover ``dose_iu`` (rounding up)."""
    d = require_range("dose_iu", dose_iu, 0, 100000, unit="IU")
    v = require_range("vial_iu", vial_iu, 50, 15000, unit="IU")
    return max(1, int(math.ceil(d / v - _EPS)))


def fmh_dose_iu(whole_blood_ml: float, red_cells_ml: float, profile, route: str = "IM") -> tuple[int, str]:
    """Anti-D needed for a bleed by the profile's rule; returns (whole IU, explanation)."""
    fm = profile.get("fmh")
    if route not in ("IM", "IV"):
        raise CareInputError("route", f"{route!r} is not one of: IM, IV")
    if fm["rule"] == "vials-per-30ml":
        per = fm["whole_blood_ml_per_vial"]
        n = whole_blood_ml / per
        vials = int(math.floor(n + 0.5 + _EPS)) + 1
        dose = max(fm["min_dose_iu"], vials * fm["vial_dose_iu"])
        # the rounding boundary is the half vial: 0.4999 must not read "0.50" and then round down
        half = math.floor(n + _EPS) + 0.5
        how = (f"{format_against(whole_blood_ml, half * per, 1, note=False)} mL / {per:g} mL per "
               f"{fm['vial_dose_iu'] // 5} µg = {format_against(n, half)}; round "
               f"(.5 up) and add one: {vials} x {fm['vial_dose_iu'] // 5} µg")
        return int(dose), how
    rate = fm["iu_per_ml_red_cells_im"] if route == "IM" else fm["iu_per_ml_red_cells_iv"]
    if rate <= 0:
        raise CareInputError("route",
                             f"profile {profile.id} gives no IU-per-mL rate for {route}; follow the product label")
    need = int(math.ceil(red_cells_ml * rate - _EPS))
    dose = max(fm["min_dose_iu"], need)
    how = (f"{red_cells_ml:.2f} mL red cells x {rate:g} IU/mL ({route}) = {need} IU; "
           f"at least {fm['min_dose_iu']} IU")
    return int(dose), how


def fmh_result(*, profile, fetal_cells=None, cells_counted=None, fetal_cell_percent=None,
               maternal_volume_ml=5000.0, route="IM", vial_sizes_iu=()) -> dict:
    """The whole FMH calculation: bleed, anti-D needed, vials per stocked product, warnings."""
    fm = profile.get("fmh")
    vol = fmh_volume(fetal_cells=fetal_cells, cells_counted=cells_counted, fetal_cell_percent=fetal_cell_percent,
                     maternal_volume_ml=maternal_volume_ml, fetal_hct=fm["fetal_hct"],
                     correction=fm["kb_correction_factor"])
    dose, how = fmh_dose_iu(vol["fetal_whole_blood_ml"], vol["fetal_red_cells_ml"], profile, route)
    sizes = tuple(int(v) for v in (vial_sizes_iu or (fm["default_vial_iu"],)))
    by_product = []
    for v in sizes:
        n = vials_for(dose, v)
        by_product.append({"vial_iu": v, "vial_ug": iu_to_ug(v), "vials": n, "total_iu": n * v,
                           "total_ug": iu_to_ug(n * v)})
    warnings = []
    if route == "IM" and dose > fm["max_im_iu_at_once"]:
        warnings.append(f"{dose} IU is more than {fm['max_im_iu_at_once']} IU, more than can sensibly be given IM at "
                        f"once: consider an IV anti-D product, and discuss with the blood bank / a clinician")
    return {
        "method": "percent" if fetal_cell_percent is not None else "counts",
        "fetal_cell_fraction": _num(vol["fetal_cell_fraction"]),
        "maternal_volume_ml": _num(vol["maternal_volume_ml"]),
        "fetal_whole_blood_ml": _num(vol["fetal_whole_blood_ml"]),
        "fetal_red_cells_ml": _num(vol["fetal_red_cells_ml"]),
        "route": route, "dose_iu": dose, "dose_ug": iu_to_ug(dose), "rule": fm["rule"], "working": how,
        "vials": by_product[0]["vials"], "vial_iu": by_product[0]["vial_iu"], "vials_by_product": by_product,
        "warnings": warnings, "source": profile.section_source("fmh"), "caution": profile.caution,
    }


# ---- chance that the fetus is RhD positive (Hardy-Weinberg) ------------------------------

def fetal_rhd_probability(*, rhd_negative_frequency, partner_rhd: str = "positive",
                          partner_zygosity: str = "unknown", paternity_certain: bool = True,
                          fetal_rhd: str | None = None) -> dict:
    """P(fetus RhD positive). Hardy-Weinberg: d allele frequency q = sqrt(f), f = RhD-negative
    frequency. Partner RhD positive, zygosity unknown: P = (p^2 + pq) / (p^2 + 2pq) = 1 / (1 + q).
    Partner unknown (a random man): P = 1 - q. A cell-free fetal RHD result overrides
    (negative -> 0, positive -> 1; inconclusive -> the genetic estimate, managed as positive)."""
    f = require_range("rhd_negative_frequency", rhd_negative_frequency, 0, 1, lo_open=True, hi_open=True)
    q = math.sqrt(f)
    p = 1 - q
    if partner_rhd not in ("positive", "negative", "unknown"):
        raise CareInputError("partner_rhd", f"{partner_rhd!r} is not one of: positive, negative, unknown")
    if partner_zygosity not in ("homozygous", "heterozygous", "unknown"):
        raise CareInputError("partner_zygosity",
                             f"{partner_zygosity!r} is not one of: homozygous, heterozygous, unknown")
    if fetal_rhd not in (None, "positive", "negative", "inconclusive"):
        raise CareInputError("fetal_rhd", f"{fetal_rhd!r} is not one of: positive, negative, inconclusive")
    basis = partner_rhd
    if not paternity_certain and partner_rhd != "unknown":
        basis = "unknown"
    if basis == "negative":
        genetic, why = 0.0, "partner RhD negative (paternity certain): the fetus inherits d from both parents"
    elif basis == "unknown":
        genetic, why = p, f"partner not known: a random man passes D with probability 1 - q = {p:.4f}"
    elif partner_zygosity == "homozygous":
        genetic, why = 1.0, "partner RhD positive, homozygous DD"
    elif partner_zygosity == "heterozygous":
        genetic, why = 0.5, "partner RhD positive, heterozygous Dd"
    else:
        genetic = 1.0 / (1.0 + q)
        why = (f"partner RhD positive, zygosity unknown: P(DD) = {p * p / (1 - f):.4f}, "
               f"P(Dd) = {2 * p * q / (1 - f):.4f}; P(fetus positive) = 1/(1+q) = {genetic:.4f}")
    prob, managed = genetic, ("positive" if genetic > 0 else "negative")
    if fetal_rhd == "negative":
        prob, managed, why = 0.0, "negative", "cell-free fetal RHD negative"
    elif fetal_rhd == "positive":
        prob, managed, why = 1.0, "positive", "cell-free fetal RHD positive"
    elif fetal_rhd == "inconclusive":
        managed, why = "positive", why + "; cell-free fetal RHD inconclusive: managed as positive"
    return {"probability": _num(prob), "genetic_probability": _num(genetic), "d_allele_frequency": _num(q),
            "rhd_negative_frequency": f, "managed_as": managed, "reason": why,
            "source": "Hardy-Weinberg equilibrium (q^2 = RhD-negative frequency)"}


# ---- dose for a sensitising event --------------------------------------------------------

@dataclass
class EventDose:
    needed: bool
    dose_iu: int | None
    fmh_test_required: bool
    deadline_hours: float
    late_window_days: int
    reason: str
    source: str
    conditional: bool = False
    repeat_every_days: int | None = None
    repeat_dose_iu: int | None = None
    notes: list[str] = field(default_factory=list)
    # For a conditional event (band conditional_kinds): True when the bleeding is heavy, repeated
    # or with abdominal pain, False when recorded as none of them, None when not (all) recorded.
    condition_met: bool | None = None

    @property
    def dose_ug(self) -> float | None:
        return None if self.dose_iu is None else iu_to_ug(self.dose_iu)

    def to_dict(self) -> dict:
        d = asdict(self)
        d["dose_ug"] = self.dose_ug
        return d


# The facts that make a conditional event (bleeding early in pregnancy) need anti-D, in the
# words of BSH 2014 (Qureshi et al.): "repeated, heavy or associated with abdominal pain".
BLEEDING_FACTS = (("bleeding_heavy", "heavy"), ("bleeding_repeated", "repeated"),
                  ("abdominal_pain", "with abdominal pain"))
BLEEDING_CONDITION = "heavy, repeated or with abdominal pain"


def bleeding_condition(facts: dict) -> bool | None:
    """True when any of the facts is true, False when all are recorded false, else None."""
    values = [facts.get(name) for name, _ in BLEEDING_FACTS]
    if any(v is True for v in values):
        return True
    if all(v is False for v in values):
        return False
    return None


def bleeding_words(facts: dict) -> str:
    """The recorded facts in words: "heavy, with abdominal pain"; "" when none is true."""
    return ", ".join(words for name, words in BLEEDING_FACTS if facts.get(name) is True)


def unrecorded_bleeding_facts(facts: dict) -> list[str]:
    """The facts not recorded (neither yes nor no), in words."""
    return [words for name, words in BLEEDING_FACTS if facts.get(name) is None]


def event_dose(kind: str, ga_days, profile, *, products=(), ongoing: bool = False,
               bleeding_heavy: bool | None = None, bleeding_repeated: bool | None = None,
               abdominal_pain: bool | None = None) -> EventDose:
    """Anti-D for one sensitising event, by GA band and kind (profile ``events.bands``).

    A kind the band lists in ``conditional_kinds`` (bleeding early in pregnancy) needs anti-D
    only when the bleeding is heavy, repeated or with abdominal pain: given as the three facts
    (None = not recorded). With none of them recorded the dose is proposed on that condition."""
    if kind not in EVENT_KINDS:
        raise CareInputError("kind", f"{kind!r} is not one of: {', '.join(EVENT_KINDS)}")
    ga = require_range("ga_days", ga_days, 0, 44 * 7, unit="days")
    if ga != int(ga):
        raise CareInputError("ga_days", "must be whole days")
    ga = int(ga)
    ev = profile.get("events")
    band = profile.band_for(ga)
    src = f"{band.source} [profile {profile.id} {profile.version}]"
    hours, late = ev["deadline_hours"], ev["late_window_days"]
    fmh = ga >= profile.ga("events.fmh_test_from_ga") and band.covers(band.fmh_test_kinds, kind)
    band_text = f"{format_ga(band.from_ga_days)} to {format_ga(band.to_ga_days)}"
    before = f"before {format_ga(band.to_ga_days + 1)}"
    what = f"{event_words(kind)} at {format_ga(ga)}"
    if band.covers(band.not_needed_kinds, kind):
        reason = f"{what}: the profile forgoes anti-D for this event in {band_text}"
        if ev["forgone_shared_decision"]:
            reason += "; it may still be offered after a shared decision with the woman"
        return EventDose(False, None, False, hours, late, reason, src)
    conditional = kind in band.conditional_kinds
    if not conditional and not band.covers(band.kinds, kind):
        return EventDose(False, None, False, hours, late,
                         f"{what}: not among the events needing anti-D in {band_text} "
                         f"(listed: {', '.join(band.kinds)}"
                         + (f"; {', '.join(band.conditional_kinds)} only if {BLEEDING_CONDITION}"
                            if band.conditional_kinds else "") + ")", src)
    facts = {"bleeding_heavy": bleeding_heavy, "bleeding_repeated": bleeding_repeated,
             "abdominal_pain": abdominal_pain}
    met = bleeding_condition(facts) if conditional else None
    if conditional and met is False:
        return EventDose(False, None, False, hours, late,
                         f"{what}, bleeding neither heavy nor repeated and without abdominal pain: anti-D not "
                         f"needed {before} (only for bleeding that is {BLEEDING_CONDITION})", src,
                         conditional=True, condition_met=False)
    dose = band.dose_iu
    notes = []
    if band.reduced_dose_if_stocked:
        small = [p for p in products if p.vial_iu <= band.reduced_dose_iu]
        if small:
            dose = band.reduced_dose_iu
            notes.append(f"{iu_to_ug(dose):g} µg product stocked ({small[0].name}): reduced dose used")
        else:
            notes.append(f"no {iu_to_ug(band.reduced_dose_iu):g} µg product stocked: full dose {iu_to_ug(dose):g} µg")
    rep = None
    if ev["repeat_for_ongoing_bleeding"] and ongoing and ga >= profile.ga("events.repeat_from_ga"):
        rep = ev["repeat_every_days"]
        notes.append(f"ongoing bleeding: repeat at least {ev['repeat_dose_iu']} IU every "
                     f"{rep // 7} weeks, with an FMH test")
    reason = f"{what}: {dose} IU ({iu_to_ug(dose):g} µg) within {hours:g} hours"
    if met:
        reason = (f"{what}, bleeding {bleeding_words(facts)}: {dose} IU ({iu_to_ug(dose):g} µg) within "
                  f"{hours:g} hours ({before} anti-D is for bleeding that is {BLEEDING_CONDITION})")
    elif conditional:
        reason += f" if the bleeding is {BLEEDING_CONDITION}; otherwise not needed {before}"
    if fmh:
        reason += "; take an FMH test sample (before the dose where possible) to check whether more is needed"
    return EventDose(True, dose, fmh, hours, late, reason, src, conditional, rep,
                     ev["repeat_dose_iu"] if rep else None, notes, met)


# ---- fetal weight and intrauterine transfusion volume -----------------------------------

def hadlock_efw(hc_cm, ac_cm, fl_cm) -> float:
    """EFW (g), Hadlock FP et al., Am J Obstet Gynecol 1985;151:333-337 (HC, AC, FL in cm):
    log10 EFW = 1.326 - 0.00326 AC FL + 0.0107 HC + 0.0438 AC + 0.158 FL."""
    hc = require_range("hc_cm", hc_cm, 5, 45, unit="cm")
    ac = require_range("ac_cm", ac_cm, 5, 50, unit="cm")
    fl = require_range("fl_cm", fl_cm, 1, 10, unit="cm")
    return 10 ** (1.326 - 0.00326 * ac * fl + 0.0107 * hc + 0.0438 * ac + 0.158 * fl)


# Fetoplacental blood volume about 0.14 mL per gram of estimated fetal weight, as used in the
# Mandelbrot et al. 1988 (Am J Obstet Gynecol 158:1-6) transfusion-volume formula compared by
# Giannina et al. 1998 (Fetal Diagn Ther 13:94-97). Figure from memory.
FETOPLACENTAL_ML_PER_G = 0.14


def iut_volume(efw_g, fetal_hct, target_hct, donor_hct, ml_per_g: float = FETOPLACENTAL_ML_PER_G) -> dict:
    """Volume (mL) = EFW (g) x 0.14 mL/g x (target Hct - fetal Hct) / donor Hct (Mandelbrot 1988)."""
    efw = require_range("efw_g", efw_g, 200, 5000, unit="g")
    fh = require_range("fetal_hct", fetal_hct, 5, 75, unit="%")
    th = require_range("target_hct", target_hct, 5, 75, unit="%")
    dh = require_range("donor_hct", donor_hct, 50, 90, unit="%")
    if th <= fh:
        raise CareInputError("target_hct", f"{th:g} % must be above the fetal Hct {fh:g} %")
    if dh <= th:
        raise CareInputError("donor_hct", f"{dh:g} % must be above the target Hct {th:g} %")
    fpv = efw * ml_per_g
    vol = fpv * (th - fh) / dh
    return {"efw_g": _num(efw), "fetoplacental_volume_ml": _num(fpv), "fetal_hct": fh, "target_hct": th,
            "donor_hct": dh, "volume_ml": _num(vol),
            "source": "Mandelbrot L et al., Am J Obstet Gynecol 1988;158:1-6 (as compared by Giannina G et al., "
                      "Fetal Diagn Ther 1998;13:94-97): V = EFW x 0.14 mL/g x (target Hct - fetal Hct) / donor Hct",
            "suggestion": "for a fetal medicine specialist to decide; volume and rate per local protocol"}
