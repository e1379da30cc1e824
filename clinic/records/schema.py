"""The record kinds rhledger keeps, their fields, and the allowed values.

This is the one description of the data model. Validation (``validate.py``),
the web forms, the API, the CLI, card import and bundle import all read it, so a
field added here is checked the same way everywhere.

Every stored record has an envelope (see ``ENVELOPE_FIELDS``) plus the fields of
its kind. Dates are ISO ``YYYY-MM-DD``; date-times are stored in UTC as
``YYYY-MM-DDTHH:MM:SSZ`` and shown in the facility's local time. Gestational age
is stored as whole days (``ga_days``); ``30+2`` is 212 days.

Anti-D amounts are stored canonically in IU (``dose_iu``) with the unit the
user entered kept beside it (``entered_unit``); 1 µg = 5 IU (WHO International
Standard for anti-D immunoglobulin; BSH 2014 guideline, Qureshi et al.,
Transfusion Medicine 24:8-20, section 2).
"""
from __future__ import annotations

from dataclasses import dataclass, field

SCHEMA_VERSION = 1

# Gestational age limits for any recorded entry, in days (4+0 to 44+0).
GA_MIN_DAYS = 4 * 7
GA_MAX_DAYS = 44 * 7

ABO = ("A", "B", "AB", "O", "unknown")
RHD = ("positive", "negative", "weak-d", "partial-d", "inconclusive")
PARTNER_RHD = ("positive", "negative", "unknown")
RHD_ZYGOSITY = ("homozygous", "heterozygous", "unknown")
TYPING_METHODS = ("tube", "column-agglutination", "tile-or-slide", "microplate", "molecular", "other")
FETAL_RHD = ("positive", "negative", "inconclusive")
SCREEN_RESULT = ("negative", "positive")
ANTIBODIES = ("anti-D", "anti-C", "anti-c", "anti-E", "anti-e", "anti-K", "anti-Fya", "other")
ANTI_D_ORIGIN = ("passive", "immune", "undetermined")
# Doubling dilutions reported as 1:N.
TITRES = tuple(2 ** k for k in range(0, 13))  # 1 … 4096
EVENT_KINDS = (
    "miscarriage",
    "termination",
    "ectopic",
    "molar-pregnancy",
    "antepartum-haemorrhage",
    "abdominal-trauma",
    "external-cephalic-version",
    "amniocentesis",
    "chorionic-villus-sampling",
    "fetal-blood-sampling",
    "intrauterine-death",
    "other",
    # Added later (the card payload appends new choices at the end): bleeding with the
    # pregnancy continuing, the guidelines' own term (BSH 2014, Qureshi et al.).
    "threatened-miscarriage",
)
FMH_METHODS = ("rosette", "kleihauer-betke", "flow-cytometry")
ROSETTE_RESULT = ("positive", "negative")
DOSE_UNITS = ("ug", "IU")
ROUTES = ("IM", "IV")
INDICATIONS = ("routine-antenatal", "sensitising-event", "postpartum", "large-fmh")
PREGNANCY_STATUS = ("ongoing", "delivered", "ended-early", "transferred", "lost-to-follow-up")
BIRTH_OUTCOMES = ("live-birth", "stillbirth")
BABY_RHD = ("positive", "negative", "not-tested")
DAT = ("positive", "negative", "not-done")
STOCK_MOVES = ("received", "given", "discarded", "cold-chain-break", "count-correction")

IU_PER_UG = 5


@dataclass(frozen=True)
class Field:
    """One field of a record kind, with what it may hold."""

    name: str
    type: str  # str, int, float, bool, date, datetime, choice, choices, ref, ga
    label: str
    required: bool = False
    choices: tuple = ()
    min: float | None = None
    max: float | None = None
    max_length: int = 200
    help: str = ""
    # For type "date"/"datetime": refuse values after "now" (with a small clock skew allowance).
    not_future: bool = True
    # For type "bool": the form always asks, so an unticked box records "no" (False) rather
    # than leaving the field out; left out then means "not asked" (older records, the API).
    unticked_is_no: bool = False


@dataclass(frozen=True)
class Kind:
    """A record kind: its name, what it hangs from, and its fields."""

    name: str
    label: str
    parent: str  # "none", "woman", "pregnancy" or "facility"
    fields: tuple[Field, ...]
    # Checks that span fields; names of functions in validate.py.
    cross_checks: tuple[str, ...] = field(default=())

    def field(self, name: str) -> Field:
        for f in self.fields:
            if f.name == name:
                return f
        raise KeyError(name)

    @property
    def field_names(self) -> tuple[str, ...]:
        return tuple(f.name for f in self.fields)


def _ga(name="ga_days", label="Gestational age", required=False):
    return Field(name, "ga", label, required=required, min=GA_MIN_DAYS, max=GA_MAX_DAYS,
                 help="weeks+days, e.g. 28+3; computed from dating when left empty")


KINDS: dict[str, Kind] = {}


def _kind(k: Kind) -> Kind:
    KINDS[k.name] = k
    return k


_kind(Kind("woman", "Woman", "none", (
    Field("name", "str", "Full name", required=True, max_length=120),
    Field("birth_date", "date", "Date of birth"),
    Field("stated_age", "int", "Stated age (years)", min=10, max=60,
          help="when the date of birth is not known"),
    Field("village", "str", "Village or settlement", max_length=120),
    Field("address", "str", "Address or directions", max_length=300),
    Field("phone", "str", "Phone", max_length=30),
    Field("register_no", "str", "Register number", max_length=40),
), cross_checks=("birth_date_or_age",)))

_kind(Kind("pregnancy", "Pregnancy", "woman", (
    Field("booked_on", "date", "Booking date", required=True),
    Field("lmp", "date", "Last menstrual period (first day)"),
    Field("scan_on", "date", "Dating scan date"),
    Field("scan_crl_mm", "float", "Crown-rump length at the scan (mm)", min=3, max=84,
          help="Robinson & Fleming 1975 is validated for CRL 3-84 mm (about 6+0 to 14+0)"),
    Field("scan_ga_days", "ga", "GA by the scan (if CRL not recorded)", min=GA_MIN_DAYS, max=GA_MAX_DAYS),
    Field("edd", "date", "Estimated date of delivery (as agreed)", not_future=False),
    Field("gravidity", "int", "Gravidity", min=1, max=25),
    Field("parity", "int", "Parity", min=0, max=24),
    Field("prior_sensitising", "str", "Earlier sensitising history", max_length=300),
    Field("prior_anti_d", "str", "Earlier anti-D", max_length=300),
    Field("transfusion_history", "bool", "Ever transfused"),
    Field("status", "choice", "Status", required=True, choices=PREGNANCY_STATUS),
    Field("multiple", "int", "Number of fetuses", min=1, max=4),
), cross_checks=("gravidity_parity", "dating_present", "scan_pair")))

_kind(Kind("typing", "Blood group (woman)", "pregnancy", (
    Field("abo", "choice", "ABO", required=True, choices=ABO),
    Field("rhd", "choice", "RhD", required=True, choices=RHD),
    Field("weak_d_type", "str", "Weak D type (if genotyped)", max_length=20,
          help="e.g. 1, 2, 3, 4.0; leave empty when not known"),
    Field("partial_d_category", "str", "Partial D category", max_length=20, help="e.g. DVI"),
    Field("method", "choice", "Method", choices=TYPING_METHODS),
    Field("tested_on", "date", "Date tested", required=True),
    Field("lab", "str", "Laboratory", max_length=120),
), cross_checks=("d_variant_detail",)))

_kind(Kind("partner_typing", "Blood group (baby's father)", "pregnancy", (
    Field("abo", "choice", "ABO", choices=ABO),
    Field("rhd", "choice", "RhD", required=True, choices=PARTNER_RHD),
    Field("rhd_zygosity", "choice", "RHD zygosity", choices=RHD_ZYGOSITY),
    Field("method", "choice", "Method", choices=TYPING_METHODS),
    Field("tested_on", "date", "Date tested"),
    Field("paternity_certain", "bool", "Paternity certain"),
)))

_kind(Kind("fetal_rhd", "Fetal RHD (cell-free DNA)", "pregnancy", (
    Field("result", "choice", "Result", required=True, choices=FETAL_RHD),
    Field("sampled_on", "date", "Sample date", required=True),
    _ga(label="GA at sampling"),
    Field("lab", "str", "Laboratory", max_length=120),
)))

_kind(Kind("screen", "Antibody screen (IAT)", "pregnancy", (
    Field("sampled_at", "datetime", "Sample taken", required=True),
    _ga(),
    Field("result", "choice", "Result", required=True, choices=SCREEN_RESULT),
    Field("antibodies", "choices", "Antibodies identified", choices=ANTIBODIES),
    Field("antibody_other", "str", "Other antibody (name)", max_length=40),
    Field("titre", "choice", "Titre (1:N)", choices=TITRES,
          help="doubling dilution of the antibody named in 'titre for'"),
    Field("titre_antibody", "choice", "Titre for", choices=ANTIBODIES),
    Field("anti_d_iu_ml", "float", "Anti-D quantitation (IU/mL)", min=0, max=1000),
    Field("anti_d_origin", "choice", "Anti-D judged", choices=ANTI_D_ORIGIN),
    Field("lab", "str", "Laboratory", max_length=120),
), cross_checks=("screen_consistency",)))

_kind(Kind("event", "Sensitising event", "pregnancy", (
    # Not "kind": that name is the envelope's record kind (a stored record is flat).
    Field("event_kind", "choice", "Event", required=True, choices=EVENT_KINDS),
    Field("occurred_at", "datetime", "When it happened", required=True),
    _ga(),
    # What the guidelines ask about bleeding before 12 weeks (BSH 2014, Qureshi et al.,
    # Transfus Med 24:8-20: anti-D for uterine bleeding that is repeated, heavy or with
    # abdominal pain): three separate facts, each asked on the form.
    Field("bleeding_heavy", "bool", "Bleeding is heavy", unticked_is_no=True),
    Field("bleeding_repeated", "bool", "Bleeding is repeated (more than one episode)", unticked_is_no=True),
    Field("abdominal_pain", "bool", "With abdominal pain", unticked_is_no=True),
    Field("ongoing", "bool", "Bleeding continues (intermittent or ongoing)"),
    Field("notes", "str", "Notes", max_length=500),
)))

_kind(Kind("fmh", "FMH test", "pregnancy", (
    Field("method", "choice", "Method", required=True, choices=FMH_METHODS),
    Field("sampled_at", "datetime", "Sample taken", required=True),
    Field("rosette_result", "choice", "Rosette result", choices=ROSETTE_RESULT),
    Field("fetal_cells", "int", "Fetal cells counted", min=0, max=100000),
    Field("cells_counted", "int", "Total cells counted", min=100, max=1000000),
    Field("fetal_cell_percent", "float", "Fetal cells (%)", min=0, max=100),
    Field("maternal_volume_ml", "float", "Maternal blood volume (mL)", min=2000, max=10000,
          help="default from the facility configuration"),
    Field("covers_id", "ref", "Event or birth this test belongs to"),
), cross_checks=("fmh_method_fields",)))

_kind(Kind("dose", "Anti-D given", "pregnancy", (
    Field("given_at", "datetime", "Given at", required=True),
    Field("amount", "float", "Dose", required=True, min=0.000001, max=30000,
          help="a positive number in the unit chosen"),
    Field("unit", "choice", "Unit", required=True, choices=DOSE_UNITS),
    Field("route", "choice", "Route", required=True, choices=ROUTES),
    Field("product", "str", "Product", max_length=80),
    Field("lot", "str", "Lot number", required=True, max_length=40),
    Field("lot_expiry", "date", "Lot expiry", required=True, not_future=False),
    Field("indication", "choice", "Indication", required=True, choices=INDICATIONS),
    Field("given_by", "str", "Given by", required=True, max_length=80),
    Field("covers_id", "ref", "Event or birth this dose covers"),
    # A dose the care engine's plan does not support (more than the profile allows, a woman
    # managed as RhD positive, after immune anti-D): a clinician records it, with the reason.
    Field("override_reason", "str", "Reason for departing from the plan", max_length=300,
          help="only when the dose differs from the plan; recorded by a clinician"),
), cross_checks=("dose_canonical",)))

_kind(Kind("doppler", "MCA Doppler", "pregnancy", (
    Field("measured_at", "datetime", "Measured at", required=True),
    _ga(),
    Field("mca_psv_cm_s", "float", "MCA peak systolic velocity (cm/s)", required=True, min=5, max=150),
)))

_kind(Kind("fbs", "Fetal blood sampling", "pregnancy", (
    Field("sampled_at", "datetime", "Sampled at", required=True),
    _ga(),
    Field("hb_g_dl", "float", "Fetal Hb (g/dL)", min=1, max=25),
    Field("hct_pct", "float", "Fetal Hct (%)", min=5, max=75),
), cross_checks=("hb_or_hct",)))

_kind(Kind("iut", "Intrauterine transfusion", "pregnancy", (
    Field("given_at", "datetime", "Given at", required=True),
    _ga(),
    Field("volume_ml", "float", "Volume transfused (mL)", required=True, min=1, max=500),
    Field("donor_hct_pct", "float", "Donor Hct (%)", min=50, max=90,
          help="packed donor cells for IUT are usually 75-85 %"),
    Field("pre_hct_pct", "float", "Fetal Hct before (%)", min=5, max=75),
    Field("post_hct_pct", "float", "Fetal Hct after (%)", min=5, max=75),
)))

_kind(Kind("birth", "Birth", "pregnancy", (
    Field("born_at", "datetime", "Born at", required=True),
    _ga(),
    Field("outcome", "choice", "Outcome", required=True, choices=BIRTH_OUTCOMES),
    Field("baby_abo", "choice", "Baby ABO", choices=ABO),
    Field("baby_rhd", "choice", "Baby RhD", required=True, choices=BABY_RHD),
    Field("dat", "choice", "Baby DAT", choices=DAT),
    Field("cord_sampled", "bool", "Cord blood sample taken"),
)))

_kind(Kind("referral", "Referral", "pregnancy", (
    Field("referred_on", "date", "Referred on", required=True),
    Field("to_facility", "str", "Referred to", required=True, max_length=120),
    Field("reason", "str", "Reason", required=True, max_length=500),
    Field("question", "str", "Question asked", max_length=500),
)))

_kind(Kind("stock", "Anti-D stock movement", "facility", (
    Field("move", "choice", "Movement", required=True, choices=STOCK_MOVES),
    Field("at", "datetime", "When", required=True),
    Field("product", "str", "Product", required=True, max_length=80),
    Field("vial_iu", "int", "Vial size (IU)", required=True, min=50, max=15000,
          help="250 µg = 1250 IU, 300 µg = 1500 IU"),
    Field("lot", "str", "Lot number", required=True, max_length=40),
    Field("lot_expiry", "date", "Lot expiry", required=True, not_future=False),
    Field("vials", "int", "Vials (a positive count; the movement says which way)", required=True, min=1, max=10000),
    Field("dose_id", "ref", "Dose record (for 'given')"),
    Field("notes", "str", "Notes", max_length=300),
)))

# Envelope of every stored record. Set by the store, never by a form.
ENVELOPE_FIELDS = (
    "id",            # UUID, made where the record is first created (a phone may make it offline)
    "kind",          # one of KINDS
    "facility",      # facility ID that created it
    "woman_id",      # for pregnancy and entries
    "pregnancy_id",  # for entries
    "created_at", "created_by",
    "amended_at", "amended_by",
    "version",       # 1 on create, +1 on each amendment
    "amendments",    # [{"at", "by", "reason", "changes": {field: {"old", "new"}}}]
    "origin",        # optional: {"via": "card"|"bundle", "facility", "issue"}
    "schema",        # SCHEMA_VERSION at write time
    "voided", "voided_reason",  # set by Store.void: the record stays, but no longer counts
)

ENTRY_KINDS = tuple(k for k, v in KINDS.items() if v.parent == "pregnancy")
