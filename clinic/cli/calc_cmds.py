"""`rhledger calc ...`: the care engine's calculators on the command line.

Readable output by default, ``--json`` for machines (numbers as numbers, units in the keys).
Every dose is shown in µg and IU with the caution. The web calculator page calls the same
clinic.care functions.
"""
from __future__ import annotations

from datetime import date, datetime, timezone

import click

from clinic.care import calc
from clinic.care.dating import (
    RF_INTERCEPT,
    RF_SLOPE,
    edd_from_lmp,
    edd_naegele_calendar,
    ga_days_from_crl,
    ga_from_crl,
    ga_on,
)
from clinic.care.errors import CareError, CareInputError
from clinic.care.model import Product
from clinic.care.protocol import list_profiles, load_profile
from clinic.care_inputs import care_inputs
from clinic.cli.common import clean_errors, data_option, emit_json, resolve_data
from clinic.config import ConfigError, load_settings
from clinic.records.schema import EVENT_KINDS, GA_MAX_DAYS, GA_MIN_DAYS
from clinic.records.values import GAFormatError, format_ga, parse_ga

ERRORS = (CareError, GAFormatError, ConfigError)
DEFAULT_PROFILE = "bsh-2014"


def _settings(data):
    """The facility settings when <data>/config.toml exists, else None (calc works without a store)."""
    path = resolve_data(data)
    if not (path / "config.toml").exists():
        return None
    return load_settings(path)


def _profile(profile_id, data):
    """--profile, else the facility's; the facility's comes with its local overrides."""
    s = _settings(data)
    if s is not None and profile_id in (None, s.profile):
        return care_inputs(s)[0]
    return load_profile(DEFAULT_PROFILE if profile_id is None else profile_id)


def _ga(text, field="ga") -> int:
    try:
        days = parse_ga(text)
    except GAFormatError as e:
        raise CareInputError(field, str(e)) from None
    if not GA_MIN_DAYS <= days <= GA_MAX_DAYS:
        raise CareInputError(field, f"{format_ga(days)} is outside the allowed range {format_ga(GA_MIN_DAYS)} to "
                                    f"{format_ga(GA_MAX_DAYS)} weeks+days")
    return days


def _date(text, field) -> date:
    try:
        return date.fromisoformat(text)
    except (TypeError, ValueError):
        raise CareInputError(field, f"{text!r} is not a date (YYYY-MM-DD)") from None


def _out(as_json: bool, obj: dict, lines: list[str]):
    if as_json:
        emit_json(obj)
    else:
        for line in lines:
            click.echo(line)


def _dose_text(iu) -> str:
    return "none" if iu is None else f"{iu:g} IU = {calc.iu_to_ug(iu):g} µg"


profile_option = click.option("--profile", "profile_id", default=None,
                              help=f"Protocol profile id (default: the facility's, else {DEFAULT_PROFILE}); "
                                   f"see `rhledger calc profiles`.")
json_option = click.option("--json", "as_json", is_flag=True, help="Machine-readable JSON output.")


@click.group()
def calc_group():
    """Clinical calculators (dating, MCA-PSV, fetal Hb, FMH and anti-D doses, IUT volume).

    Decision support only: confirm every dose against the product label and local protocol.
    """


@calc_group.command("profiles")
@json_option
@clean_errors(*ERRORS)
def profiles_cmd(as_json):
    """List the shipped protocol profiles."""
    rows = list_profiles()
    _out(as_json, {"profiles": rows}, [f"{r['id']:24} {r['version']:16} {r['title']}" for r in rows])


@calc_group.command("edd")
@click.option("--lmp", required=True, help="First day of the last menstrual period, YYYY-MM-DD.")
@json_option
@clean_errors(*ERRORS)
def edd_cmd(lmp, as_json):
    """EDD by Naegele's rule (LMP + 280 days, ACOG Committee Opinion 700)."""
    d = _date(lmp, "lmp")
    edd, cal = edd_from_lmp(d), edd_naegele_calendar(d)
    obj = {"lmp": d.isoformat(), "edd": edd.isoformat(), "rule": "LMP + 280 days (Naegele's rule; ACOG CO 700, 2017)",
           "edd_naegele_calendar": cal.isoformat()}
    _out(as_json, obj, [f"EDD {edd.isoformat()} (LMP {d.isoformat()} + 280 days, Naegele's rule)",
                        f"  calendar form (+1 year -3 months +7 days): {cal.isoformat()}"])


@calc_group.command("ga")
@click.option("--lmp", default=None, help="LMP, YYYY-MM-DD.")
@click.option("--edd", default=None, help="Agreed EDD instead of the LMP, YYYY-MM-DD.")
@click.option("--on", "on", default=None, help="Date, YYYY-MM-DD (default: today, UTC).")
@json_option
@clean_errors(*ERRORS)
def ga_cmd(lmp, edd, on, as_json):
    """Gestational age on a date, from the LMP or the EDD."""
    if (lmp is None) == (edd is None):
        raise CareInputError("lmp", "give either --lmp or --edd")
    day = _date(on, "on") if on else datetime.now(timezone.utc).date()
    kw = {"lmp": _date(lmp, "lmp")} if lmp else {"edd": _date(edd, "edd")}
    days = ga_on(day, **kw)
    if days < 0:
        raise CareInputError("on", f"{day.isoformat()} is before the start of the pregnancy")
    e = edd_from_lmp(kw["lmp"]) if lmp else kw["edd"]
    obj = {"on": day.isoformat(), "ga_days": days, "ga": format_ga(days), "ga_weeks": round(days / 7, 2),
           "edd": e.isoformat()}
    _out(as_json, obj, [f"GA {format_ga(days)} ({days} days) on {day.isoformat()}; EDD {e.isoformat()}"])


@calc_group.command("crl")
@click.option("--crl-mm", type=float, required=True, help="Crown-rump length in mm (3-84).")
@json_option
@clean_errors(*ERRORS)
def crl_cmd(crl_mm, as_json):
    """GA from crown-rump length (Robinson & Fleming 1975)."""
    raw = ga_from_crl(crl_mm)
    days = ga_days_from_crl(crl_mm)
    obj = {"crl_mm": crl_mm, "ga_days": days, "ga": format_ga(days), "ga_days_exact": round(raw, 2),
           "source": "Robinson HP, Fleming JEE, Br J Obstet Gynaecol 1975;82:702-710: "
                     f"GA(days) = {RF_SLOPE} sqrt(CRL) + {RF_INTERCEPT}"}
    _out(as_json, obj, [f"CRL {crl_mm:g} mm -> GA {format_ga(days)} ({raw:.1f} days), Robinson & Fleming 1975"])


@calc_group.command("mom")
@click.option("--psv", type=float, required=True, help="MCA peak systolic velocity, cm/s.")
@click.option("--ga", required=True, help="GA as 30+2 or decimal weeks (15+0 to 40+6).")
@profile_option
@data_option
@json_option
@clean_errors(*ERRORS)
def mom_cmd(psv, ga, profile_id, data, as_json):
    """MCA-PSV in multiples of the median (Mari et al. 2000)."""
    prof = _profile(profile_id, data)
    r = calc.mca_result(psv, _ga(ga), prof)
    r["profile"] = prof.id
    s = prof.get("surveillance")
    _out(as_json, r, [f"MCA-PSV {psv:g} cm/s at {r['ga']}: {r['mom_text']} MoM (median {r['median_cm_s']:.1f} cm/s) "
                      f"— {r['severity']}",
                      f"  thresholds: {s['mca_mom_mild']:.2f} MoM {r['threshold_mild_cm_s']:.1f}, "
                      f"{s['mca_mom_moderate']:.2f} MoM {r['threshold_moderate_cm_s']:.1f}, "
                      f"{s['mca_mom_severe']:.2f} MoM {r['threshold_severe_cm_s']:.1f} cm/s",
                      f"  {r['suggestion']}", f"  source: {r['source']}"])


@calc_group.command("fetal-hb")
@click.option("--hb", type=float, required=True, help="Fetal haemoglobin, g/dL.")
@click.option("--ga", required=True, help="GA as 28+0 or decimal weeks (18+0 to 40+0).")
@profile_option
@data_option
@json_option
@clean_errors(*ERRORS)
def fetal_hb_cmd(hb, ga, profile_id, data, as_json):
    """Fetal Hb in multiples of the median and the anaemia class (Mari 2000)."""
    prof = _profile(profile_id, data)
    r = calc.fetal_hb_result(hb, _ga(ga), prof)
    r["profile"] = prof.id
    _out(as_json, r, [f"fetal Hb {hb:g} g/dL at {r['ga']}: {r['mom_text']} MoM (median {r['median_g_dl']:.1f} g/dL) "
                      f"— anaemia: {r['severity']}", f"  source: {r['source']}"])


@calc_group.command("fmh")
@click.option("--fetal-cells", type=int, default=None, help="Fetal cells counted (Kleihauer-Betke).")
@click.option("--cells-counted", type=int, default=None, help="Total cells counted.")
@click.option("--percent", "percent", type=float, default=None,
              help="Fetal cells % (flow cytometry), instead of counts.")
@click.option("--maternal-volume-ml", type=float, default=None,
              help="Maternal blood volume, mL (default: the facility's, else 5000).")
@click.option("--height-cm", type=float, default=None, help="Estimate the blood volume from height (Nadler 1962)...")
@click.option("--weight-kg", type=float, default=None, help="... and weight.")
@click.option("--route", type=click.Choice(["IM", "IV"]), default="IM", show_default=True)
@click.option("--vial-iu", "vial_iu", type=int, multiple=True,
              help="Stocked vial size in IU (repeatable; default: the facility's products, else the profile's).")
@profile_option
@data_option
@json_option
@clean_errors(*ERRORS)
def fmh_cmd(fetal_cells, cells_counted, percent, maternal_volume_ml, height_cm, weight_kg, route, vial_iu,
            profile_id, data, as_json):
    """Fetomaternal haemorrhage: bleed volume, anti-D needed and vials."""
    prof = _profile(profile_id, data)
    s = _settings(data)
    basis = "given"
    if height_cm is not None or weight_kg is not None:
        if maternal_volume_ml is not None:
            raise CareInputError("maternal_volume_ml", "give the volume or height and weight, not both")
        if height_cm is None or weight_kg is None:
            raise CareInputError("height_cm", "give both --height-cm and --weight-kg")
        maternal_volume_ml = calc.nadler_blood_volume_ml(height_cm, weight_kg)
        basis = "Nadler 1962 from height and weight"
    elif maternal_volume_ml is None:
        maternal_volume_ml = s.maternal_blood_volume_ml if s else 5000.0
        basis = "facility default" if s else "default 5000 mL"
    sizes = vial_iu or (tuple(p.vial_iu for p in s.products) if s else ())
    r = calc.fmh_result(profile=prof, fetal_cells=fetal_cells, cells_counted=cells_counted, fetal_cell_percent=percent,
                        maternal_volume_ml=maternal_volume_ml, route=route, vial_sizes_iu=sizes)
    r["maternal_volume_basis"] = basis
    r["profile"] = prof.id
    lines = [f"bleed: {r['fetal_whole_blood_ml']:.1f} mL fetal whole blood = "
             f"{r['fetal_red_cells_ml']:.1f} mL fetal red cells "
             f"(maternal blood volume {r['maternal_volume_ml']:.0f} mL, {basis})",
             f"anti-D needed ({route}): {_dose_text(r['dose_iu'])}  [{r['working']}]"]
    for v in r["vials_by_product"]:
        lines.append(f"  {v['vials']} vial(s) of {_dose_text(v['vial_iu'])} = {_dose_text(v['total_iu'])}")
    lines += [f"WARNING: {w}" for w in r["warnings"]]
    lines += [f"source: {r['source']}", r["caution"]]
    _out(as_json, r, lines)


@calc_group.command("event-dose")
@click.option("--kind", required=True, type=click.Choice(EVENT_KINDS), help="The sensitising event.")
@click.option("--ga", required=True, help="GA at the event, 10+0 or decimal weeks.")
@click.option("--ongoing", is_flag=True, help="Bleeding continues (intermittent).")
@click.option("--heavy/--not-heavy", default=None, help="The bleeding is heavy (or not); left out: not known.")
@click.option("--repeated/--not-repeated", default=None, help="The bleeding is repeated (or not).")
@click.option("--pain/--no-pain", default=None, help="With abdominal pain (or without).")
@click.option("--stocked-vial-iu", type=int, multiple=True,
              help="Vial sizes stocked, IU (repeatable; default: the facility's products).")
@profile_option
@data_option
@json_option
@clean_errors(*ERRORS)
def event_dose_cmd(kind, ga, ongoing, heavy, repeated, pain, stocked_vial_iu, profile_id, data, as_json):
    """Anti-D for a sensitising event: dose, deadline, FMH test."""
    prof = _profile(profile_id, data)
    s = _settings(data)
    products = tuple(Product(f"{v} IU vial", v) for v in stocked_vial_iu) or (s.products if s else ())
    days = _ga(ga)
    r = calc.event_dose(kind, days, prof, products=products, ongoing=ongoing, bleeding_heavy=heavy,
                        bleeding_repeated=repeated, abdominal_pain=pain)
    obj = r.to_dict()
    obj.update({"kind": kind, "ga_days": days, "ga": format_ga(days), "profile": prof.id,
                "profile_version": prof.version, "caution": prof.caution})
    lines = [f"{kind} at {format_ga(days)} ({prof.id}): " + (
        f"anti-D {_dose_text(r.dose_iu)} within {r.deadline_hours:g} hours" if r.needed else "no anti-D needed"),
             f"  {r.reason}"]
    if r.needed:
        lines.append(f"  FMH test: {'required' if r.fmh_test_required else 'not required'}; if the "
                     f"{r.deadline_hours:g} hours are missed, a late dose up to {r.late_window_days} days after the "
                     f"event")
    lines += [f"  {n}" for n in r.notes] + [f"source: {r.source}", prof.caution]
    _out(as_json, obj, lines)


@calc_group.command("fetal-rhd-chance")
@click.option("--rhd-negative-frequency", type=float, default=None,
              help="Share of the population that is RhD negative (default: the facility's, else 0.15).")
@click.option("--partner-rhd", type=click.Choice(["positive", "negative", "unknown"]), default="positive",
              show_default=True)
@click.option("--zygosity", type=click.Choice(["homozygous", "heterozygous", "unknown"]), default="unknown",
              show_default=True)
@click.option("--paternity-uncertain", is_flag=True, help="Paternity not certain: use the population.")
@click.option("--fetal-rhd", type=click.Choice(["positive", "negative", "inconclusive"]), default=None,
              help="Cell-free fetal RHD result, when known (overrides).")
@data_option
@json_option
@clean_errors(*ERRORS)
def fetal_rhd_cmd(rhd_negative_frequency, partner_rhd, zygosity, paternity_uncertain, fetal_rhd, data, as_json):
    """Chance that the fetus is RhD positive (Hardy-Weinberg)."""
    if rhd_negative_frequency is None:
        s = _settings(data)
        rhd_negative_frequency = s.rhd_negative_frequency if s else 0.15
    r = calc.fetal_rhd_probability(rhd_negative_frequency=rhd_negative_frequency, partner_rhd=partner_rhd,
                                   partner_zygosity=zygosity, paternity_certain=not paternity_uncertain,
                                   fetal_rhd=fetal_rhd)
    _out(as_json, r, [f"P(fetus RhD positive) = {r['probability']:.4f} ({r['probability'] * 100:.1f} %)",
                      f"  {r['reason']}", f"  source: {r['source']}"])


@calc_group.command("efw")
@click.option("--hc-cm", type=float, required=True)
@click.option("--ac-cm", type=float, required=True)
@click.option("--fl-cm", type=float, required=True)
@json_option
@clean_errors(*ERRORS)
def efw_cmd(hc_cm, ac_cm, fl_cm, as_json):
    """Estimated fetal weight from HC, AC, FL (Hadlock 1985)."""
    g = calc.hadlock_efw(hc_cm, ac_cm, fl_cm)
    obj = {"efw_g": round(g, 1), "source": "Hadlock FP et al., Am J Obstet Gynecol 1985;151:333-337 (HC, AC, FL)"}
    _out(as_json, obj, [f"EFW {g:.0f} g (Hadlock 1985, HC/AC/FL)"])


@calc_group.command("iut-volume")
@click.option("--efw-g", type=float, default=None, help="Estimated fetal weight, g (or give --hc-cm/--ac-cm/--fl-cm).")
@click.option("--hc-cm", type=float, default=None)
@click.option("--ac-cm", type=float, default=None)
@click.option("--fl-cm", type=float, default=None)
@click.option("--fetal-hct", type=float, required=True, help="Fetal Hct before, %.")
@click.option("--target-hct", type=float, required=True, help="Target fetal Hct, %.")
@click.option("--donor-hct", type=float, required=True, help="Donor blood Hct, %.")
@json_option
@clean_errors(*ERRORS)
def iut_cmd(efw_g, hc_cm, ac_cm, fl_cm, fetal_hct, target_hct, donor_hct, as_json):
    """Intrauterine transfusion volume (Mandelbrot 1988), for a specialist to decide."""
    if efw_g is None:
        if None in (hc_cm, ac_cm, fl_cm):
            raise CareInputError("efw_g", "give --efw-g, or --hc-cm, --ac-cm and --fl-cm to estimate it (Hadlock 1985)")
        efw_g = calc.hadlock_efw(hc_cm, ac_cm, fl_cm)
    r = calc.iut_volume(efw_g, fetal_hct, target_hct, donor_hct)
    _out(
        as_json,
        r,
        [
            f"IUT volume {r['volume_ml']:.1f} mL (EFW {r['efw_g']:.0f} g, Hct {fetal_hct:g} -> {target_hct:g} %, "
            f"donor {donor_hct:g} %)",
            f"  {r['suggestion']}",
            f"  source: {r['source']}",
        ],
    )


def register(cli: click.Group) -> None:
    cli.add_command(calc_group, "calc")
