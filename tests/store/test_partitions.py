"""A write rewrites one partition file only; pregnancies and their entries share a file."""
from __future__ import annotations

from tests.conftest import FACILITY_ID, USERNAME


def _stat(p):
    st = p.stat()
    return (st.st_ino, st.st_mtime_ns, st.st_size)


def _book(store, woman, booked_on, now):
    return store.create("pregnancy", {"booked_on": booked_on, "lmp": "2025-10-01", "status": "ongoing"},
                        by=USERNAME, facility=FACILITY_ID, woman_id=woman["id"], now=now).record


def test_pregnancy_and_its_entries_live_in_the_booking_month_file(store, data_dir, woman, now):
    p = _book(store, woman, "2026-01-20", now)
    store.create("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-01-20"}, by=USERNAME,
                 facility=FACILITY_ID, pregnancy_id=p["id"], now=now)
    jan = data_dir / "records" / FACILITY_ID / "2026-01.json"
    assert jan.exists()
    names = sorted(f.name for f in (data_dir / "records" / FACILITY_ID).glob("*.json"))
    assert names == ["2026-01.json", "2026-03.json"]
    assert jan.read_text().count('"kind":"typing"') == 1


def test_a_write_leaves_other_partition_files_untouched(store, data_dir, woman, now):
    jan = _book(store, woman, "2026-01-20", now)
    feb = _book(store, woman, "2026-02-10", now)
    store.create("stock", {"move": "received", "at": "2026-03-01T08:00", "product": "Anti-D 1500 IU",
                           "vial_iu": 1500, "lot": "L1", "lot_expiry": "2027-01-01", "vials": 5},
                 by=USERNAME, facility=FACILITY_ID, now=now)
    folder = data_dir / "records" / FACILITY_ID
    others = {name: _stat(folder / name) for name in ("2026-01.json", "2026-03.json", "stock-2026.json")}
    before_feb = _stat(folder / "2026-02.json")
    store.create("typing", {"abo": "O", "rhd": "negative", "tested_on": "2026-02-10"}, by=USERNAME,
                 facility=FACILITY_ID, pregnancy_id=feb["id"], now=now)
    store.amend(feb["id"], {"gravidity": 3}, by=USERNAME, reason="r", now=now)
    assert {name: _stat(folder / name) for name in others} == others
    assert _stat(folder / "2026-02.json") != before_feb
    assert store.get(jan["id"])["booked_on"] == "2026-01-20"


def test_amending_the_booking_date_does_not_move_the_record(store, data_dir, woman, now):
    p = _book(store, woman, "2026-01-20", now)
    store.amend(p["id"], {"booked_on": "2026-02-03"}, by=USERNAME, reason="date typo", now=now)
    assert not (data_dir / "records" / FACILITY_ID / "2026-02.json").exists()
    assert store.get(p["id"])["booked_on"] == "2026-02-03"


def test_stock_goes_to_a_yearly_file(store, data_dir, now):
    store.create("stock", {"move": "received", "at": "2025-12-31T23:30", "product": "Anti-D 1500 IU",
                           "vial_iu": 1500, "lot": "L1", "lot_expiry": "2027-01-01", "vials": 5},
                 by=USERNAME, facility=FACILITY_ID, now=now)
    assert (data_dir / "records" / FACILITY_ID / "stock-2025.json").exists()  # local time (UTC+3)
