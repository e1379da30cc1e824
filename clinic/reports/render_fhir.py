"""HL7 FHIR R4 output: MeasureReports of the monthly coverage, and an individual-level Bundle.

``measure_bundle``: a Bundle (type collection) holding one MeasureReport (status complete,
type summary, period = the month in local time) per facility and one for the district; a
group per indicator with the numerator and denominator populations and the percentage as
measureScore (absent when the denominator is 0). No names.

``records_bundle``: a Bundle (type collection) of the pregnancies counted in the month:
Patient, Observation (ABO/RhD typing, antibody screen, titre, fetal RHD, FMH test, baby's
RhD, sensitising events that are not procedures), MedicationAdministration (anti-D, dose in
IU, lot and expiry in a contained Medication) and Procedure (invasive sensitising
procedures). It carries names: only for roles with the follow-up permission (clinic.accounts.roles.FOLLOW_UP).

The output is plain JSON-able dicts; the tests validate it with the fhir.resources library.
Where no standard code could be checked, a code of our own system (``SYS_OWN``) is used
with the text, and the docs say so (docs/fhir-export.md).
"""
from __future__ import annotations

import uuid
from datetime import datetime, time, timezone, tzinfo

from clinic.records.choices import event_words
from clinic.reports.coverage import DISTRICT, INDICATORS, Case, MonthReport

LOINC = "http://loinc.org"
SNOMED = "http://snomed.info/sct"
UCUM = "http://unitsofmeasure.org"
MEASURE_POPULATION = "http://terminology.hl7.org/CodeSystem/measure-population"
OBS_CATEGORY = "http://terminology.hl7.org/CodeSystem/observation-category"
SYS_OWN = "urn:rhledger:code"
SYS_INDICATOR = "urn:rhledger:indicator"
SYS_FACILITY = "urn:rhledger:facility"
SYS_WOMAN = "urn:rhledger:woman"
MEASURE = "urn:rhledger:measure:rhd-prophylaxis-coverage"
NS = uuid.UUID("6f1c1f64-52f4-4c1e-9d7a-6b3c2a8e0d15")  # our namespace for stable fullUrls

# ---- codes, each with where it was read ----------------------------------------------
# LOINC 882-1 "ABO and Rh group [Type] in Blood": loinc.org detail page for 882-1
# (r.details.loinc.org/LOINC/882-1.html).
LOINC_ABO_RH = ("882-1", "ABO and Rh group [Type] in Blood")
# LOINC 890-4 antibody screen: listed for "Antibody Screen Automated" in the ARUP
# Laboratories test directory (ltd.aruplab.com/Tests/Pub/0010020); display from memory.
LOINC_AB_SCREEN = ("890-4", "Blood group antibody screen [Presence] in Serum or Plasma")
# LOINC 4579-9 Kleihauer-Betke: ARUP test directory entry 0040105 "Kleihauer-Betke Stain";
# display from memory.
LOINC_KB = ("4579-9", "Hemoglobin F [Presence] in Red Blood Cells by Kleihauer-Betke method")
# LOINC 48556-5 fetal red cells by flow cytometry: Barnes-Jewish Hospital laboratory test
# catalogue, test 7044 "Fetal Red Cell Percentage"; display from memory.
LOINC_FLOW = ("48556-5", "Fetal cells/100 red blood cells in Blood by Flow cytometry")
# SNOMED CT answers Positive 10828004 / Negative 260385009: answer list LL360-9 on
# loinc.org/75264-2.
SCT_POSITIVE = ("10828004", "Positive")
SCT_NEGATIVE = ("260385009", "Negative")
# SNOMED CT ABO + RhD findings: IPS STU1 value set "Results Laboratory ABO+RH Group (GPS)"
# (hl7.org/fhir/uv/ips/stu1/ValueSet-results-laboratory-blood-abo-rh-grp-gps-uv-ips.html).
SCT_ABO_RH = {
    ("A", "negative"): ("278152006", "Blood group A Rh(D) negative"),
    ("A", "positive"): ("278149003", "Blood group A Rh(D) positive"),
    ("AB", "negative"): ("278154007", "Blood group AB Rh(D) negative"),
    ("AB", "positive"): ("278151004", "Blood group AB Rh(D) positive"),
    ("B", "negative"): ("278153001", "Blood group B Rh(D) negative"),
    ("B", "positive"): ("278150003", "Blood group B Rh(D) positive"),
    ("O", "negative"): ("278148006", "Blood group O Rh(D) negative"),
    ("O", "positive"): ("278147001", "Blood group O Rh(D) positive"),
}
# SNOMED CT 165746003 "RhD negative": HL7 Italy laboratory report value set
# results-observation-bloodgroup (hl7.it/fhir/lab-report). 165747007 "RhD positive": from memory.
SCT_RHD = {"negative": ("165746003", "RhD negative"), "positive": ("165747007", "RhD positive")}
# SNOMED CT routes 78421000 Intramuscular route, 47625008 Intravenous route: from memory.
SCT_ROUTE = {"IM": ("78421000", "Intramuscular route"), "IV": ("47625008", "Intravenous route")}
# SNOMED CT 34536000 Amniocentesis: from memory. Other sensitising procedures carry our code.
SCT_PROCEDURE = {"amniocentesis": ("34536000", "Amniocentesis")}
PROCEDURE_EVENTS = ("amniocentesis", "chorionic-villus-sampling", "fetal-blood-sampling",
                    "external-cephalic-version", "termination")


def _cc(system: str, code: str, display: str, text: str | None = None) -> dict:
    out = {"coding": [{"system": system, "code": code, "display": display}]}
    if text:
        out["text"] = text
    return out


def _own(code: str, text: str) -> dict:
    return _cc(SYS_OWN, code, text, text)


def _local_dt(d, t: time, tz: tzinfo) -> str:
    return datetime.combine(d, t, tzinfo=tz).isoformat()


def _fhir_dt(utc_text: str) -> str:
    return utc_text.replace("Z", "+00:00")


def _full(kind: str, rid: str) -> str:
    return f"urn:uuid:{uuid.uuid5(NS, f'{kind}:{rid}')}"


# ---- MeasureReport --------------------------------------------------------------------

def measure_report(rep: MonthReport, facility: str, tz: tzinfo) -> dict:
    groups = []
    for ind in INDICATORS:
        c = rep.cell(facility, ind.id)
        g = {"id": ind.id.replace("_", "-"),
             "code": {"coding": [{"system": SYS_INDICATOR, "code": ind.id, "display": ind.title}],
                      "text": ind.definition}}
        if ind.is_count:
            g["population"] = [{"code": _cc(MEASURE_POPULATION, "initial-population", "Initial Population"),
                                "count": c.numerator}]
            g["measureScore"] = {"value": c.numerator, "unit": "count", "system": UCUM, "code": "1"}
        else:
            g["population"] = [
                {"code": _cc(MEASURE_POPULATION, "numerator", "Numerator"), "count": c.numerator},
                {"code": _cc(MEASURE_POPULATION, "denominator", "Denominator"), "count": c.denominator},
            ]
            if c.percentage is not None:
                g["measureScore"] = {"value": c.percentage, "unit": "%", "system": UCUM, "code": "%"}
        groups.append(g)
    fid = "district" if facility == DISTRICT else facility
    return {
        "resourceType": "MeasureReport",
        "id": f"rhd-coverage-{rep.month}-{fid}"[:64],
        "status": "complete",
        "type": "summary",
        "measure": MEASURE,
        "date": rep.generated_at.astimezone(timezone.utc).isoformat(),
        "period": {"start": _local_dt(rep.month.first_day, time(0, 0, 0), tz),
                   "end": _local_dt(rep.month.last_day, time(23, 59, 59), tz)},
        "reporter": {"identifier": {"system": SYS_FACILITY, "value": fid},
                     "display": rep.facility_name(facility)},
        "group": groups,
    }


def measure_bundle(rep: MonthReport, tz: tzinfo) -> dict:
    entries = []
    for f in rep.columns:
        mr = measure_report(rep, f, tz)
        entries.append({"fullUrl": _full("MeasureReport", mr["id"]), "resource": mr})
    return {"resourceType": "Bundle", "id": f"rhd-coverage-{rep.month}", "type": "collection",
            "timestamp": rep.generated_at.astimezone(timezone.utc).isoformat(), "entry": entries}


# ---- individual-level Bundle ----------------------------------------------------------

def _patient(w: dict) -> dict:
    p = {"resourceType": "Patient", "id": w["id"],
         "identifier": [{"system": SYS_WOMAN, "value": w["id"]}],
         "gender": "female",
         "managingOrganization": {"identifier": {"system": SYS_FACILITY, "value": w["facility"]}}}
    if w.get("register_no"):
        p["identifier"].append({"system": f"{SYS_FACILITY}:{w['facility']}:register", "value": w["register_no"]})
    if w.get("name"):
        p["name"] = [{"text": w["name"]}]
    if w.get("birth_date"):
        p["birthDate"] = w["birth_date"]
    if w.get("phone"):
        p["telecom"] = [{"system": "phone", "value": w["phone"]}]
    if w.get("village") or w.get("address"):
        p["address"] = [{"text": ", ".join(x for x in (w.get("address"), w.get("village")) if x)}]
    return p


def _obs(rec: dict, subject: str, code: dict, when: str | None, **value) -> dict:
    o = {"resourceType": "Observation", "id": rec["id"], "status": "amended" if rec.get("version", 1) > 1 else "final",
         "category": [_cc(OBS_CATEGORY, "laboratory", "Laboratory")],
         "code": code, "subject": {"reference": subject}}
    if when:
        o["effectiveDateTime"] = when
    o.update(value)
    return o


def _day(d: str) -> str:
    return d[:10]


def _typing(r: dict, subject: str) -> dict:
    abo, rhd = r.get("abo"), r.get("rhd")
    code = _cc(LOINC, *LOINC_ABO_RH)
    if (abo, rhd) in SCT_ABO_RH:
        value = _cc(SNOMED, *SCT_ABO_RH[(abo, rhd)])
    elif rhd in SCT_RHD:
        value = {"coding": [{"system": SNOMED, "code": SCT_RHD[rhd][0], "display": SCT_RHD[rhd][1]}],
                 "text": f"ABO {abo}, RhD {rhd}"}
    else:
        detail = r.get("weak_d_type") or r.get("partial_d_category") or ""
        value = _own(f"rhd-{rhd}", f"ABO {abo}, RhD {rhd}{(' ' + detail) if detail else ''}")
    return _obs(r, subject, code, _day(r["tested_on"]), valueCodeableConcept=value)


def _screen(r: dict, subject: str) -> list[dict]:
    pos = r.get("result") == "positive"
    value = _cc(SNOMED, *(SCT_POSITIVE if pos else SCT_NEGATIVE))
    o = _obs(r, subject, _cc(LOINC, *LOINC_AB_SCREEN), _fhir_dt(r["sampled_at"]), valueCodeableConcept=value)
    abs_ = r.get("antibodies") or []
    if abs_:
        o["note"] = [{"text": "Antibodies identified: " + ", ".join(abs_)
                      + (f" ({r['antibody_other']})" if r.get("antibody_other") else "")
                      + (f"; anti-D judged {r['anti_d_origin']}" if r.get("anti_d_origin") else "")}]
    out = [o]
    if r.get("titre"):
        t = {"resourceType": "Observation", "id": str(uuid.uuid5(NS, f"titre:{r['id']}")), "status": "final",
             "category": [_cc(OBS_CATEGORY, "laboratory", "Laboratory")],
             "code": _own("antibody-titre", f"{r.get('titre_antibody') or 'antibody'} titre (IAT)"),
             "subject": {"reference": subject}, "effectiveDateTime": _fhir_dt(r["sampled_at"]),
             "valueRatio": {"numerator": {"value": 1}, "denominator": {"value": r["titre"]}},
             "derivedFrom": [{"reference": _full("Observation", r["id"])}]}
        out.append(t)
    return out


def _fetal(r: dict, subject: str) -> dict:
    return _obs(r, subject, _own("fetal-rhd-cfdna", "Fetal RHD genotype from cell-free DNA in maternal plasma"),
                _day(r["sampled_on"]),
                valueCodeableConcept=_own(f"fetal-rhd-{r['result']}", f"Fetal RHD {r['result']}"))


def _fmh(r: dict, subject: str) -> dict:
    when = _fhir_dt(r["sampled_at"])
    pct = r.get("fetal_cell_percent")
    if pct is None and r.get("fetal_cells") is not None and r.get("cells_counted"):
        pct = round(100 * r["fetal_cells"] / r["cells_counted"], 4)
    if r["method"] == "rosette":
        return _obs(r, subject, _own("fmh-rosette", "Fetomaternal haemorrhage rosette screen"), when,
                    valueCodeableConcept=_cc(SNOMED, *(SCT_POSITIVE if r.get("rosette_result") == "positive"
                                                       else SCT_NEGATIVE)))
    code = _cc(LOINC, *(LOINC_KB if r["method"] == "kleihauer-betke" else LOINC_FLOW))
    return _obs(r, subject, code, when,
                valueQuantity={"value": pct, "unit": "%", "system": UCUM, "code": "%"})


def _baby(r: dict, subject: str) -> dict:
    rhd = r.get("baby_rhd")
    value = _cc(SNOMED, *SCT_RHD[rhd]) if rhd in SCT_RHD else _own("not-tested", "Baby's RhD not tested")
    o = _obs(r, subject, _own("baby-rhd-cord", "Baby's RhD type (cord blood)"), _fhir_dt(r["born_at"]),
             valueCodeableConcept=value)
    o["note"] = [{"text": f"Birth outcome {r.get('outcome')}; the subject is the mother"}]
    return o


def _event(r: dict, subject: str) -> dict:
    kind = r.get("event_kind", "other")
    words = event_words(kind)
    if kind in PROCEDURE_EVENTS:
        code = _cc(SNOMED, *SCT_PROCEDURE[kind]) if kind in SCT_PROCEDURE else _own(kind, words)
        code.setdefault("text", words)
        return {"resourceType": "Procedure", "id": r["id"], "status": "completed", "code": code,
                "subject": {"reference": subject}, "performedDateTime": _fhir_dt(r["occurred_at"]),
                "note": [{"text": "Potentially sensitising event for an RhD-negative woman"}]}
    o = _obs(r, subject, _own("sensitising-event", "Potentially sensitising event in pregnancy"),
             _fhir_dt(r["occurred_at"]), valueCodeableConcept=_own(kind, words))
    o["category"] = [_cc(OBS_CATEGORY, "exam", "Exam")]
    return o


def _dose(r: dict, subject: str) -> dict:
    med = {"resourceType": "Medication", "id": "antid",
           "code": _own("anti-d-immunoglobulin", r.get("product") or "Anti-D immunoglobulin"),
           "batch": {"lotNumber": r["lot"], "expirationDate": r["lot_expiry"]}}
    dosage = {"dose": {"value": r["dose_iu"], "unit": "IU", "system": UCUM, "code": "[iU]"},
              "text": f"{r['amount']:g} {r['unit']} {r['route']}"}
    if r.get("route") in SCT_ROUTE:
        dosage["route"] = _cc(SNOMED, *SCT_ROUTE[r["route"]])
    return {"resourceType": "MedicationAdministration", "id": r["id"], "status": "completed",
            "contained": [med], "medicationReference": {"reference": "#antid"},
            "subject": {"reference": subject}, "effectiveDateTime": _fhir_dt(r["given_at"]),
            "reasonCode": [_own(f"indication-{r['indication']}", r["indication"].replace("-", " "))],
            "dosage": dosage}


def records_bundle(cases: list[Case], rep: MonthReport) -> dict:
    """The individual-level Bundle of the pregnancies counted in ``rep`` (names inside)."""
    entries = []
    seen_women = set()
    for case in cases:
        if case.id not in rep.members:
            continue
        w = case.woman
        subject = _full("Patient", w["id"])
        if w["id"] not in seen_women:
            seen_women.add(w["id"])
            entries.append({"fullUrl": subject, "resource": _patient(w)})
        for e in case.entries:
            k = e["kind"]
            res: list[dict] = []
            if k == "typing":
                res = [_typing(e, subject)]
            elif k == "screen":
                res = _screen(e, subject)
            elif k == "fetal_rhd":
                res = [_fetal(e, subject)]
            elif k == "fmh":
                res = [_fmh(e, subject)]
            elif k == "birth":
                res = [_baby(e, subject)]
            elif k == "event":
                res = [_event(e, subject)]
            elif k == "dose":
                res = [_dose(e, subject)]
            for r in res:
                entries.append({"fullUrl": _full(r["resourceType"], r["id"]), "resource": r})
    return {"resourceType": "Bundle", "id": f"rhd-records-{rep.month}", "type": "collection",
            "timestamp": rep.generated_at.astimezone(timezone.utc).isoformat(), "entry": entries}
