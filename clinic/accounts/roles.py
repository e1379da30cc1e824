"""Who may do what: one table of permissions per role.

The web guard (``clinic.web.access``), the menu, the admin pages and the ``rhledger users``
commands all read this table; nothing else names a role. Pure Python: no Flask, no storage.

A permission is a short text; a role holds a set of them. Writing a record needs the
permission of its kind (``permission_for_kind``), and amending or voiding it needs the same.
"""
from __future__ import annotations

# ---- permissions ---------------------------------------------------------------------------

READ_RECORDS = "records.read"          # women by name, pregnancies, plans: Today, Find, the record, API reads
BOOK = "records.book"                  # register a woman, book a pregnancy (and amend those two)
RESULTS = "entry.results"              # blood groups, antibody screens, fetal RHD, FMH tests
CARE = "entry.care"                    # sensitising events, anti-D doses, births, referrals
SURVEILLANCE = "entry.surveillance"    # MCA Doppler, fetal blood sampling, intrauterine transfusion
OVERRIDE = "plan.override"             # record a dose the plan does not support, with the reason
STOCK_READ = "stock.read"
STOCK_RECORD = "stock.record"
CALC = "calc"                          # the calculators (dose, FMH, MoM, dating)
CARD_READ = "cards.read"               # read a patient-held card (it shows her name and history)
CARD_IMPORT = "cards.import"           # copy a card's records into this facility
CARD_PRINT = "cards.print"             # issue (sign) and print a card or a referral note
REPORT = "district.report"             # the month's coverage, aggregate only (no names)
FOLLOW_UP = "district.follow-up"       # the follow-up lists: missed doses by name
BUNDLE_IMPORT = "district.import"      # import clinics' bundles
BUNDLE_EXPORT = "district.export"      # export this facility's bundle for the district
USERS = "admin.users"                  # staff accounts: add, disable, reset, unlock
AUDIT = "admin.audit"                  # the audit trail
KEYS = "admin.keys"                    # the facility signing key (CLI: rhledger keys)
TRUST = "admin.trust"                  # the district trust list (CLI: rhledger trust)
BACKUPS = "admin.backups"              # backup and restore (CLI)
SETTINGS = "admin.settings"            # config.toml (CLI, the file itself)

PERMISSIONS: dict[str, str] = {
    READ_RECORDS: "see women and their records by name",
    BOOK: "register women and book pregnancies",
    RESULTS: "record results: blood groups, antibody screens, fetal RHD, FMH tests",
    CARE: "record sensitising events, anti-D doses, births and referrals",
    SURVEILLANCE: "record surveillance entries: MCA Doppler, fetal blood sampling, intrauterine transfusion",
    OVERRIDE: "record an anti-D dose the plan does not support, with the reason",
    STOCK_READ: "see the anti-D stock",
    STOCK_RECORD: "record stock movements",
    CALC: "use the calculators",
    CARD_READ: "read patient-held cards",
    CARD_IMPORT: "import a card's records",
    CARD_PRINT: "issue and print cards and referral notes",
    REPORT: "see the monthly coverage report (no names)",
    FOLLOW_UP: "see the follow-up lists (names of women missed)",
    BUNDLE_IMPORT: "import clinics' bundles",
    BUNDLE_EXPORT: "export this facility's bundle",
    USERS: "manage staff accounts",
    AUDIT: "read the audit trail",
    KEYS: "manage the facility signing key",
    TRUST: "manage the district trust list",
    BACKUPS: "make and restore backups",
    SETTINGS: "change the settings",
}

# ---- which entry kinds need which permission -----------------------------------------------
#
# Results come from the laboratory or the clinic's own tests; events, doses, births and
# referrals are the midwife's daily work (she must be able to refer a sensitised woman
# herself, a health centre often has no clinician on site). The surveillance entries are
# measurements and procedures of fetal medicine done or read by a clinician trained for them:
# MCA Doppler (an ultrasound measurement that decides referral for fetal anaemia), fetal
# blood sampling and intrauterine transfusion (invasive procedures). A midwife still sees
# them on the record and in the plan.
KIND_PERMISSION: dict[str, str] = {
    "woman": BOOK,
    "pregnancy": BOOK,
    "typing": RESULTS,
    "partner_typing": RESULTS,
    "fetal_rhd": RESULTS,
    "screen": RESULTS,
    "fmh": RESULTS,
    "event": CARE,
    "dose": CARE,
    "birth": CARE,
    "referral": CARE,
    "doppler": SURVEILLANCE,
    "fbs": SURVEILLANCE,
    "iut": SURVEILLANCE,
    "stock": STOCK_RECORD,
}
ENTRY_PERMISSIONS = (RESULTS, CARE, SURVEILLANCE)
WRITE_PERMISSIONS = (BOOK, RESULTS, CARE, SURVEILLANCE, STOCK_RECORD)

# ---- roles ---------------------------------------------------------------------------------

_MIDWIFE = frozenset({READ_RECORDS, BOOK, RESULTS, CARE, STOCK_READ, STOCK_RECORD, CALC,
                      CARD_READ, CARD_IMPORT, CARD_PRINT, REPORT, FOLLOW_UP, BUNDLE_EXPORT})

ROLE_PERMISSIONS: dict[str, frozenset[str]] = {
    # Books, records results, events, doses, births and referrals at her facility.
    "midwife": _MIDWIFE,
    "nurse": _MIDWIFE,
    # Everything a midwife does, the surveillance entries, and a dose against the plan (with a reason).
    "clinician": _MIDWIFE | {SURVEILLANCE, OVERRIDE},
    # A laboratory or blood bank: results and the anti-D stock it issues; no booking, no doses.
    # The aggregate report only, not the follow-up lists (as before this table).
    "lab": frozenset({READ_RECORDS, RESULTS, STOCK_READ, STOCK_RECORD, CALC, CARD_READ, REPORT}),
    # Bundles, reports and follow-up lists; changes no clinical record and sees names only
    # on the follow-up lists (not Today, Find, a record or a card).
    "district-officer": frozenset({REPORT, FOLLOW_UP, BUNDLE_IMPORT, BUNDLE_EXPORT, STOCK_READ}),
    # The installation, not the women: accounts, audit, keys, trust list, backups, settings,
    # and the facility's bundle export (a monthly housekeeping task).
    "admin": frozenset({USERS, AUDIT, KEYS, TRUST, BACKUPS, SETTINGS, BUNDLE_EXPORT}),
}
ROLES: tuple[str, ...] = tuple(ROLE_PERMISSIONS)
ROLE_LABELS = {"midwife": "Midwife", "nurse": "Nurse", "clinician": "Clinician", "lab": "Laboratory",
               "district-officer": "District officer", "admin": "Administrator"}

# Where a role starts after signing in (an endpoint name of the web app).
HOME: dict[str, str] = {
    "district-officer": "district.index",
    "admin": "admin.users",
}
DEFAULT_HOME = "pages.today"


class UnknownRole(ValueError):
    """A role that is not in the table."""


def check_role(role: str) -> str:
    if role not in ROLE_PERMISSIONS:
        raise UnknownRole(f"role {role!r} is not one of: {', '.join(ROLES)}")
    return role


def permissions_of(role: str | None) -> frozenset[str]:
    return ROLE_PERMISSIONS.get(role or "", frozenset())


def may(role: str | None, permission: str) -> bool:
    """Whether ``role`` holds ``permission`` (an unknown permission is a programming error)."""
    if permission not in PERMISSIONS:
        raise KeyError(f"no permission {permission!r} in clinic.accounts.roles.PERMISSIONS")
    return permission in permissions_of(role)


def may_any(role: str | None, permissions) -> bool:
    return any(may(role, p) for p in permissions)


def permission_for_kind(kind: str) -> str:
    """The permission that writing (creating, amending, voiding) a record of ``kind`` needs."""
    try:
        return KIND_PERMISSION[kind]
    except KeyError:
        raise KeyError(f"record kind {kind!r} has no permission in clinic.accounts.roles.KIND_PERMISSION") from None


def may_write_kind(role: str | None, kind: str) -> bool:
    return kind in KIND_PERMISSION and may(role, KIND_PERMISSION[kind])


def roles_with(permission: str) -> tuple[str, ...]:
    return tuple(r for r in ROLES if may(r, permission))


def home_endpoint(role: str | None) -> str:
    return HOME.get(role or "", DEFAULT_HOME)
