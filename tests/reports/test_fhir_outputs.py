"""The FHIR R4 outputs validate with the fhir.resources library (R4 models, version 6.5.0)."""
from __future__ import annotations

import json

from fhir.resources.bundle import Bundle
from fhir.resources.measurereport import MeasureReport

from clinic.reports.coverage import DISTRICT
from clinic.reports.render_fhir import measure_bundle, measure_report, records_bundle
from tests.reports import dataset as ds


def test_measure_report_per_facility_and_district_validates(november):
    for fac in november.columns:
        mr = MeasureReport.parse_obj(measure_report(november, fac, ds.TZ))
        assert (mr.status, mr.type) == ("complete", "summary")
        assert mr.period.start.isoformat().startswith("2026-11-01T00:00:00+03:00")
        assert mr.period.end.isoformat().startswith("2026-11-30T23:59:59+03:00")


def test_measure_report_groups_carry_numerator_denominator_and_score(november):
    mr = measure_report(november, DISTRICT, ds.TZ)
    g = next(g for g in mr["group"] if g["code"]["coding"][0]["code"] == "postpartum_missed")
    pops = {p["code"]["coding"][0]["code"]: p["count"] for p in g["population"]}
    # hand-worked in test_coverage_indicators: B5 and B3 of 4 eligible births
    assert pops == {"numerator": 2, "denominator": 4}
    assert g["measureScore"]["value"] == 50.0
    # a zero denominator has no score (not 0 %)
    ga = next(g for g in measure_report(november, ds.A, ds.TZ)["group"]
              if g["code"]["coding"][0]["code"] == "event_on_time")
    assert "measureScore" not in ga


def test_measure_bundle_validates_and_carries_no_names(november):
    doc = measure_bundle(november, ds.TZ)
    b = Bundle.parse_obj(doc)
    assert b.type == "collection" and len(b.entry) == 3
    text = json.dumps(doc)
    assert "Test-" not in text and "Amina" not in text


def test_individual_level_bundle_validates(inputs, november):
    doc = records_bundle(inputs.cases, november)
    b = Bundle.parse_obj(doc)
    kinds = {e.resource.resource_type for e in b.entry}
    assert {"Patient", "Observation", "MedicationAdministration"} <= kinds


def test_individual_level_bundle_codes(inputs, november):
    doc = records_bundle(inputs.cases, november)
    res = [e["resource"] for e in doc["entry"]]
    codes = {(c["system"], c["code"]) for r in res for c in r.get("code", {}).get("coding", [])}
    # LOINC 882-1 "ABO and Rh group [Type] in Blood" (loinc.org detail page of 882-1)
    assert ("http://loinc.org", "882-1") in codes
    # LOINC 890-4 antibody screen (listed in the ARUP Laboratories test directory, 0010020)
    assert ("http://loinc.org", "890-4") in codes
    # LOINC 4579-9 Kleihauer-Betke (ARUP test directory, 0040105): B1's FMH test
    assert ("http://loinc.org", "4579-9") in codes
    # SNOMED CT 278148006 "Blood group O Rh(D) negative" (IPS STU1 ABO+RH value set)
    values = {(c["system"], c["code"]) for r in res for c in r.get("valueCodeableConcept", {}).get("coding", [])}
    assert ("http://snomed.info/sct", "278148006") in values
    doses = [r for r in res if r["resourceType"] == "MedicationAdministration"]
    e1 = next(r for r in doses if r["id"] == ds.rid("E1/dose"))
    # entered as 100 µg: 500 IU (1 µg = 5 IU), UCUM [iU]
    assert e1["dosage"]["dose"] == {"value": 500, "unit": "IU", "system": "http://unitsofmeasure.org", "code": "[iU]"}
    assert e1["contained"][0]["batch"]["lotNumber"] == "clinic-b-LOT-1"
    patients = [r for r in res if r["resourceType"] == "Patient"]
    assert len({p["id"] for p in patients}) == len(patients)


def test_sensitising_procedure_becomes_a_procedure(inputs, november):
    from clinic.reports.coverage import Case, compute_month
    from clinic.reports.month import Month

    # An amniocentesis on an invented case, planned by the engine like the others
    base = next(c for c in inputs.cases if c.id == ds.rid("E1/p"))
    ev = dict(next(e for e in base.entries if e["kind"] == "event"), event_kind="amniocentesis")
    case = Case(base.woman, base.pregnancy, [e if e["kind"] != "event" else ev for e in base.entries], base.plan,
                uses_fetal_rhd=True)
    rep = compute_month([case], Month(2026, 11), ds.TZ, now=ds.NOW)
    doc = records_bundle([case], rep)
    procs = [e["resource"] for e in doc["entry"] if e["resource"]["resourceType"] == "Procedure"]
    Bundle.parse_obj(doc)
    # SNOMED CT 34536000 Amniocentesis (from memory)
    assert procs and procs[0]["code"]["coding"][0] == {"system": "http://snomed.info/sct", "code": "34536000",
                                                       "display": "Amniocentesis"}
