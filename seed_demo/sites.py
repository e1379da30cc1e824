"""The invented Selvara district: its facilities, staff, stock and demo sign-ins.

Nothing here is real: the district, the facilities, the staff, the phone numbers (in the
unassigned +000 range) and the lot numbers (all starting DEMO-) are made up for the demo.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass
from typing import Any, Mapping

DISTRICT_NAME = "Selvara District"
TIMEZONE = "Africa/Nairobi"  # a real IANA zone; the facilities in it are invented


@dataclass(frozen=True)
class Staff:
    username: str
    password: str
    role: str
    display_name: str


@dataclass(frozen=True)
class Lot:
    """A stocked lot: ``expires_in_days`` is counted from the moment the demo is built."""

    product: str
    vial_iu: int
    lot: str
    expires_in_days: int
    received_days_ago: int
    vials_received: int


@dataclass(frozen=True)
class Site:
    key: str
    facility_id: str
    name: str
    kind: str
    phone: str
    profile: str
    overrides: Mapping[str, Any]
    products: tuple[tuple[str, int, tuple[str, ...]], ...]
    lots: Mapping[str, Lot]  # "main", "short-dated", "expired", "small"
    staff: tuple[Staff, ...]
    lab: str = ""
    regimen_note: str = ""

    @property
    def key_seed(self) -> bytes:
        """Seed of the facility's demo signing key. Demo only: anyone can recompute it."""
        return hashlib.sha256(f"rhledger demo key seed / {self.key}".encode("utf-8")).digest()

    def account(self, role: str) -> Staff:
        for s in self.staff:
            if s.role == role:
                return s
        # A facility without that role: entries fall back to the first clinical account.
        return self.staff[0]


P1500 = "Anti-D immunoglobulin 1500 IU (300 µg)"
P500 = "Anti-D immunoglobulin 500 IU (100 µg)"
P250 = "Anti-D immunoglobulin 250 IU (50 µg)"

SITE_LIST: tuple[Site, ...] = (
    Site(
        "clinic-a", "ambeni-hc", "Ambeni Health Centre", "clinic", "+000 700 000 101",
        "bsh-2014", {"routine.regimen": "single"},
        ((P1500, 1500, ("IM", "IV")), (P500, 500, ("IM",))),
        {"main": Lot(P1500, 1500, "DEMO-A15-2611", 400, 120, 20),
         "short-dated": Lot(P1500, 1500, "DEMO-A15-2602", 55, 70, 6),
         "expired": Lot(P1500, 1500, "DEMO-A15-2509", -20, 240, 4),
         "small": Lot(P500, 500, "DEMO-A05-2705", 300, 90, 15)},
        (Staff("midwife", "midwife-demo", "midwife", "Halima Tovesi (midwife)"),
         Staff("clinician", "clinician-demo", "clinician", "Ruben Okello-Marsh (clinical officer)"),
         Staff("lab", "lab-demo", "lab", "Ines Wafubwa (laboratory)"),
         Staff("admin", "admin-demo", "admin", "Ambeni administrator")),
        lab="Ambeni Health Centre laboratory",
        regimen_note="bsh-2014 with the override routine.regimen = single (1500 IU at 28-30 weeks)",
    ),
    Site(
        "clinic-b", "rusoka-hc", "Rusoka Health Centre", "clinic", "+000 700 000 202",
        "acog-2017", {},
        ((P1500, 1500, ("IM", "IV")), (P250, 250, ("IM",))),
        {"main": Lot(P1500, 1500, "DEMO-R30-2610", 380, 100, 16),
         "short-dated": Lot(P1500, 1500, "DEMO-R30-2601", 50, 60, 2),
         "small": Lot(P250, 250, "DEMO-R05-2704", 260, 80, 10)},
        (Staff("midwife", "midwife-demo", "midwife", "Esther Lokuru-Haines (midwife)"),
         Staff("clinician", "clinician-demo", "clinician", "Samuel Oyaro-Fenn (clinical officer)"),
         Staff("lab", "lab-demo", "lab", "Mwanaisha Tolle (laboratory)"),
         Staff("admin", "admin-demo", "admin", "Rusoka administrator")),
        lab="Rusoka Health Centre laboratory",
        regimen_note="acog-2017: 300 µg at 28 weeks; 50 µg before 12 weeks where stocked",
    ),
    Site(
        "clinic-c", "pellow-clinic", "Pellow Landing Clinic", "clinic", "+000 700 000 303",
        "bsh-2014", {},
        ((P500, 500, ("IM",)), (P1500, 1500, ("IM", "IV"))),
        {"main": Lot(P1500, 1500, "DEMO-P15-2609", 360, 110, 8),
         "short-dated": Lot(P500, 500, "DEMO-P05-2601", 40, 75, 10),
         "small": Lot(P500, 500, "DEMO-P05-2706", 330, 95, 24)},
        (Staff("midwife", "midwife-demo", "midwife", "Sunniva Achola (midwife)"),
         Staff("clinician", "clinician-demo", "clinician", "Tomasz Ndereva (clinical officer)"),
         Staff("lab", "lab-demo", "lab", "Jabali Rensford (laboratory)"),
         Staff("admin", "admin-demo", "admin", "Pellow administrator")),
        lab="Pellow Landing Clinic laboratory",
        regimen_note="bsh-2014 as published here: two doses of 500 IU at 28 and 34 weeks",
    ),
    Site(
        "hospital", "selvara-rh", "Selvara Referral Hospital", "hospital", "+000 700 000 404",
        "bsh-2014-single", {},
        ((P1500, 1500, ("IM", "IV")), (P500, 500, ("IM",))),
        {"main": Lot(P1500, 1500, "DEMO-H15-2612", 420, 60, 30),
         "short-dated": Lot(P500, 500, "DEMO-H05-2602", 55, 90, 12),
         "small": Lot(P500, 500, "DEMO-H05-2708", 340, 40, 20)},
        (Staff("midwife", "midwife-demo", "midwife", "Aurelia Nyamweya (midwife)"),
         Staff("clinician", "clinician-demo", "clinician", "Dr Priya Halvorsen-Mugo (obstetrician)"),
         Staff("lab", "lab-demo", "lab", "Kofi Arnesto (blood bank)"),
         Staff("admin", "admin-demo", "admin", "Hospital administrator")),
        lab="Selvara Referral Hospital laboratory",
        regimen_note="bsh-2014-single: 1500 IU at 28-30 weeks",
    ),
    Site(
        "district", "selvara-district", "Selvara District Health Office", "district", "+000 700 000 505",
        "bsh-2014", {},
        (), {},
        (Staff("officer", "officer-demo", "district-officer", "Mariam Selengo (district RH officer)"),
         Staff("admin", "admin-demo", "admin", "District administrator")),
        regimen_note="no records of its own: imports the facilities' bundles",
    ),
)

SITE_DEFS: dict[str, Site] = {s.key: s for s in SITE_LIST}
SITES: tuple[str, ...] = tuple(SITE_DEFS)
FACILITY_SITES: tuple[str, ...] = tuple(s.key for s in SITE_LIST if s.kind != "district")


def site(key: str) -> Site:
    try:
        return SITE_DEFS[key]
    except KeyError:
        raise KeyError(f"no demo site {key!r}; choose one of: {', '.join(SITES)}") from None
