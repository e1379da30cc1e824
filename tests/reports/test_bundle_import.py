"""District bundles: signed, incremental, idempotent, order-independent, refused whole when bad."""
from __future__ import annotations

from datetime import datetime

import pytest

from clinic.reports.bundle import (
    BundleInvalid,
    BundleUnreadable,
    BundleUntrusted,
    encode_bundle,
    export_bundle,
    import_bundle,
    read_bundle,
)
from clinic.reports.cases import load_inputs
from clinic.reports.coverage import INDICATORS, compute_month
from clinic.signing.keys import load_signing_key
from clinic.signing.trust import TrustEntry, TrustKey, TrustList
from clinic.store import Store
from tests.reports import dataset as ds
from tests.reports.conftest import NOVEMBER

FIRST_EXPORT = ds.local("2026-11-29 12:00")   # before R1's dose is amended (30 Nov 08:00)


def trust_for(clinics, *fids) -> TrustList:
    return TrustList([TrustEntry(f, f"Invented {f}", "clinic", "",
                                 (TrustKey(load_signing_key(clinics.dir(f)).public_raw),)) for f in fids])


@pytest.fixture(scope="module")
def bundles(tmp_path_factory):
    """Two exports per clinic: one on 29 Nov, one on 1 Dec (incremental, with the amendment)."""
    tmp_path = tmp_path_factory.mktemp("bundles")
    clinics = ds.Clinics(tmp_path / "clinics").advance(FIRST_EXPORT)
    out = {}
    for fid in (ds.A, ds.B):
        out[f"{fid}-1"] = export_bundle(clinics.stores[fid], clinics.dir(fid), facility=fid,
                                        out=tmp_path / f"{fid}-1.rhlb", now=FIRST_EXPORT).path.read_bytes()
    clinics.advance()
    for fid in (ds.A, ds.B):
        out[f"{fid}-2"] = export_bundle(clinics.stores[fid], clinics.dir(fid), facility=fid,
                                        out=tmp_path / f"{fid}-2.rhlb", now=ds.NOW).path.read_bytes()
    return clinics, out


def new_district(tmp_path, name):
    d = tmp_path / name
    ds.write_config(d, ds.DISTRICT_ID, "Invented District", "district")
    return d, Store(d)


def report_numbers(store):
    inp = load_inputs(store, store.settings, now=ds.NOW, first_month=NOVEMBER)
    rep = compute_month(inp.cases, NOVEMBER, ds.TZ, now=ds.NOW, stock_records=inp.stock, facilities=inp.facilities)
    return {(f, i.id): (rep.cell(f, i.id).numerator, rep.cell(f, i.id).denominator)
            for f in rep.columns for i in INDICATORS}, rep


def records_of(store):
    return sorted(({k: v for k, v in r.items() if k != "origin"} for r in store.iter_records()),
                  key=lambda r: r["id"])


def test_same_report_from_bundles_imported_in_two_orders(tmp_path, bundles, november):
    clinics, b = bundles
    trust = trust_for(clinics, ds.A, ds.B)
    d1, s1 = new_district(tmp_path, "d1")
    d2, s2 = new_district(tmp_path, "d2")
    for name in ("clinic-a-1", "clinic-a-2", "clinic-b-1", "clinic-b-2"):
        assert import_bundle(s1, d1, b[name], name=name, trust=trust, now=ds.NOW).status == "imported"
    for name in ("clinic-b-2", "clinic-a-2", "clinic-b-1", "clinic-a-1"):
        assert import_bundle(s2, d2, b[name], name=name, trust=trust, now=ds.NOW).status == "imported"
    n1, _ = report_numbers(s1)
    n2, _ = report_numbers(s2)
    assert n1 == n2
    assert records_of(s1) == records_of(s2)
    # ... and the same numbers as when every record was entered in one place
    truth = {(f, i.id): (november.cell(f, i.id).numerator, november.cell(f, i.id).denominator)
             for f in november.columns for i in INDICATORS}
    assert n1 == truth


def test_import_is_idempotent(tmp_path, bundles):
    clinics, b = bundles
    trust = trust_for(clinics, ds.A, ds.B)
    d, s = new_district(tmp_path, "d")
    first = import_bundle(s, d, b["clinic-a-1"], name="a1", trust=trust, now=ds.NOW)
    before = records_of(s)
    again = import_bundle(s, d, b["clinic-a-1"], name="a1", trust=trust, now=ds.NOW)
    assert first.outcomes.get("created") == first.count > 0
    assert again.outcomes == {"unchanged": first.count} and again.already
    assert records_of(s) == before


def test_woman_who_moved_clinics_is_one_woman_one_pregnancy(tmp_path, bundles):
    clinics, b = bundles
    trust = trust_for(clinics, ds.A, ds.B)
    d, s = new_district(tmp_path, "d")
    ra = import_bundle(s, d, b["clinic-a-1"], name="a1", trust=trust, now=ds.NOW)
    rb = import_bundle(s, d, b["clinic-b-1"], name="b1", trust=trust, now=ds.NOW)
    assert ra.status == rb.status == "imported"
    women = [r for r in s.iter_records(kind="woman") if r["name"] == "Dalia Test-Moved"]
    pregs = [r for r in s.iter_records(kind="pregnancy") if r["woman_id"] == ds.rid("M/w")]
    assert len(women) == 1 and len(pregs) == 1
    numbers, rep = report_numbers(s)
    assert numbers[(ds.A, "bookings")] == (4, None)   # P1, P2, P3 and M, once


def test_amendment_after_an_earlier_export_travels_in_the_next_bundle(tmp_path, bundles):
    clinics, b = bundles
    trust = trust_for(clinics, ds.A)
    d, s = new_district(tmp_path, "d")
    import_bundle(s, d, b["clinic-a-1"], name="a1", trust=trust, now=ds.NOW)
    assert s.get(ds.rid("R1/dose1"))["version"] == 1
    numbers, _ = report_numbers(s)
    assert numbers[(ds.A, "routine_on_time")][0] == 2     # R1 (as first entered: 10 Nov) and R2
    res = import_bundle(s, d, b["clinic-a-2"], name="a2", trust=trust, now=ds.NOW)
    assert res.outcomes.get("updated") == 1                # the amended dose; the rest is new
    assert s.get(ds.rid("R1/dose1"))["version"] == 2
    numbers, _ = report_numbers(s)
    assert numbers[(ds.A, "routine_on_time")] == (1, 3) and numbers[(ds.A, "routine_late")] == (1, 3)
    # the older bundle imported again does not undo the amendment
    again = import_bundle(s, d, b["clinic-a-1"], name="a1", trust=trust, now=ds.NOW)
    assert again.outcomes.get("kept-local") == 1 and s.get(ds.rid("R1/dose1"))["version"] == 2


def test_incremental_export_carries_only_what_changed(bundles):
    clinics, b = bundles
    trust = trust_for(clinics, ds.A)
    first = read_bundle(b["clinic-a-1"], trust, now=ds.NOW)
    second = read_bundle(b["clinic-a-2"], trust, now=ds.NOW)
    ids2 = {r["id"] for r in second.records}
    assert ds.rid("R1/dose1") in ids2                      # amended after the first export
    assert ds.rid("P1/w") not in ids2                      # unchanged since the first export
    assert {ds.rid("SA4"), ds.rid("SA5")} <= ids2          # entered after the first export
    assert second.header["since"] == first.header["until"]


@pytest.mark.parametrize("where", ["header", "body", "last"])
def test_bundle_with_one_byte_changed_is_refused_and_imports_nothing(tmp_path, bundles, where):
    clinics, b = bundles
    trust = trust_for(clinics, ds.A)
    data = bytearray(b["clinic-a-1"])
    pos = {"header": 40, "body": len(data) // 2 + 200, "last": len(data) - 1}[where]
    data[pos] ^= 0x01
    d, s = new_district(tmp_path, "d")
    res = import_bundle(s, d, bytes(data), name="tampered.rhlb", trust=trust, now=ds.NOW)
    assert res.status == "refused" and res.reason in ("altered", "unreadable")
    assert "refused" in res.message or "cannot be read" in res.message
    assert list(s.iter_records()) == []


def test_bundle_from_an_untrusted_clinic_is_refused_with_a_clear_message(tmp_path, bundles):
    clinics, b = bundles
    d, s = new_district(tmp_path, "d")
    res = import_bundle(s, d, b["clinic-b-1"], name="b1.rhlb", trust=trust_for(clinics, ds.A), now=ds.NOW)
    assert res.status == "refused" and res.reason == "unknown-issuer"
    assert "trust list" in res.message
    assert list(s.iter_records()) == []
    with pytest.raises(BundleUntrusted):
        read_bundle(b["clinic-b-1"], trust_for(clinics, ds.A), now=ds.NOW)


def test_signed_bundle_with_one_invalid_record_imports_nothing(tmp_path, bundles):
    clinics, b = bundles
    trust = trust_for(clinics, ds.A)
    good = read_bundle(b["clinic-a-1"], trust, now=ds.NOW).records
    bad = dict(next(r for r in good if r["kind"] == "dose"), amount=-5)
    data = encode_bundle(good + [dict(bad, id=ds.rid("bad-dose"))], key=load_signing_key(clinics.dir(ds.A)),
                         facility=ds.A, since=None, until="2026-11-29T09:00:00Z", made_at="2026-11-29T09:00:00Z")
    d, s = new_district(tmp_path, "d")
    with pytest.raises(BundleInvalid, match="amount"):
        read_bundle(data, trust, now=ds.NOW)
    res = import_bundle(s, d, data, name="bad.rhlb", trust=trust, now=ds.NOW)
    assert res.status == "refused" and res.reason == "invalid"
    assert list(s.iter_records()) == []


def test_file_that_is_not_a_bundle_is_refused(bundles):
    clinics, _ = bundles
    with pytest.raises(BundleUnreadable, match="not an rhledger bundle"):
        read_bundle(b"PK\x03\x04 a zip file", trust_for(clinics, ds.A))
    with pytest.raises(BundleUnreadable):
        read_bundle(b"RHLB\x01\x00\x00\x00\x05abc", trust_for(clinics, ds.A))


def test_import_log_records_each_bundle(tmp_path, bundles):
    from clinic.reports.bundle import import_log

    clinics, b = bundles
    trust = trust_for(clinics, ds.A)
    d, s = new_district(tmp_path, "d")
    import_bundle(s, d, b["clinic-a-1"], name="a1.rhlb", trust=trust, now=ds.NOW)
    import_bundle(s, d, b"junk", name="junk.rhlb", trust=trust, now=ds.NOW)
    log = import_log(d)
    assert [(e["name"], e["status"]) for e in log] == [("a1.rhlb", "imported"), ("junk.rhlb", "refused")]
    assert log[0]["count"] > 0 and log[0]["facility"] == ds.A and log[0]["at"] == "2026-12-01T12:00:00Z"


def test_export_since_a_time_takes_records_created_or_amended_since(tmp_path, clinics):
    res = export_bundle(clinics.stores[ds.A], clinics.dir(ds.A), facility=ds.A, out=tmp_path / "x.rhlb",
                        since="2026-11-29T00:00:00Z", now=ds.NOW)
    got = {r["id"] for r in read_bundle(res.path.read_bytes(), trust_for(clinics, ds.A), now=ds.NOW).records}
    # R1's amended dose, the last two stock movements, E4's event of 1 Dec
    assert got == {ds.rid("R1/dose1"), ds.rid("SA4"), ds.rid("SA5"), ds.rid("E4/ev-dec")}


def test_bundle_header_names_format_version_facility_and_counts(bundles):
    clinics, b = bundles
    h = read_bundle(b["clinic-b-1"], trust_for(clinics, ds.B), now=ds.NOW).header
    assert (h["format"], h["version"], h["facility"], h["since"]) == ("rhledger-bundle", 1, ds.B, None)
    assert h["count"] == sum(h["kinds"].values()) and len(h["body_sha256"]) == 32
    assert datetime.fromisoformat(h["until"].replace("Z", "+00:00")) == FIRST_EXPORT
