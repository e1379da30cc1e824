"""Installation settings: who this facility is, which protocol it follows, what it stocks.

Settings live in ``<data>/config.toml``, written by ``rhledger init`` and reviewed by the
facility. Everything clinical that a facility may change (profile choice, overrides of
profile values, population RhD-negative frequency, stocked vial sizes) is here or in the
profile files, never a constant in code. ``[supply]`` holds the anti-D supply forecast's
horizon, order lead time and transfer time (defaults in ``SupplySettings``).
"""
from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from clinic.accounts.roles import ROLES
from clinic.care.model import Product

DEFAULT_DATA_DIR = "instance"
CONFIG_FILE = "config.toml"
FACILITY_KINDS = ("clinic", "hospital", "district")
# [security] values and their allowed ranges: (default, low, high).
SECURITY_RANGES = {"idle_minutes": (15, 1, 720), "lock_after": (5, 3, 20), "lock_minutes": (15, 1, 1440)}


class ConfigError(ValueError):
    """The configuration file is missing a value or holds one out of range."""


def data_dir_from(option: str | os.PathLike | None) -> Path:
    """--data DIR, else $RHLEDGER_DATA, else ./instance."""
    return Path(option or os.environ.get("RHLEDGER_DATA") or DEFAULT_DATA_DIR)


@dataclass(frozen=True)
class Account:
    """An account of an older config.toml ([[accounts]]); accounts now live in users.json."""

    username: str
    display_name: str
    role: str
    password_hash: str


@dataclass(frozen=True)
class SupplySettings:
    """[supply] in config.toml: the forecast horizon, the order lead time, the transfer time."""

    horizon_weeks: int = 12          # weeks forecast (1-52)
    lead_time_days: int = 14         # days from placing an order to the vials on the shelf (0-180)
    transfer_days: int = 3           # days to move vials between two clinics of the district (0-60)
    upper_percentile: int = 90       # percentile of the upper figure (50-99)
    # A district's lead time for one of its clinics, when it differs: facility id -> days.
    facility_lead_time_days: dict[str, int] = field(default_factory=dict)

    def lead_time_for(self, facility: str) -> int:
        return self.facility_lead_time_days.get(facility, self.lead_time_days)


_SUPPLY_RANGES = {"horizon_weeks": (1, 52), "lead_time_days": (0, 180), "transfer_days": (0, 60),
                  "upper_percentile": (50, 99)}


def _supply_int(table: dict, key: str, where: str, source: str, lo: int, hi: int, default: int) -> int:
    v = table.get(key, default)
    if isinstance(v, bool) or not isinstance(v, int) or not lo <= v <= hi:
        raise ConfigError(f"{where}{key} {v!r} in {source}: a whole number from {lo} to {hi}")
    return v


def parse_supply(table: dict, source: str = CONFIG_FILE) -> SupplySettings:
    if not isinstance(table, dict):
        raise ConfigError(f"supply in {source} must be a table [supply]")
    known = set(_SUPPLY_RANGES) | {"facility_lead_time_days"}
    unknown = sorted(set(table) - known)
    if unknown:
        raise ConfigError(f"supply.{unknown[0]} in {source} is not a setting; allowed: {', '.join(sorted(known))}")
    d = SupplySettings()
    vals = {k: _supply_int(table, k, "supply.", source, lo, hi, getattr(d, k))
            for k, (lo, hi) in _SUPPLY_RANGES.items()}
    per = table.get("facility_lead_time_days", {})
    if not isinstance(per, dict):
        raise ConfigError(f"supply.facility_lead_time_days in {source} must be a table of facility id = days")
    lo, hi = _SUPPLY_RANGES["lead_time_days"]
    lead = {str(k): _supply_int(per, k, "supply.facility_lead_time_days.", source, lo, hi, 0) for k in per}
    return SupplySettings(**vals, facility_lead_time_days=lead)


@dataclass(frozen=True)
class Settings:
    facility_id: str
    facility_name: str
    facility_kind: str = "clinic"
    facility_phone: str = ""
    district: str = ""
    timezone: str = "UTC"
    profile: str = "bsh-2014"
    profile_overrides: dict[str, Any] = field(default_factory=dict)
    rhd_negative_frequency: float = 0.15
    maternal_blood_volume_ml: float = 5000.0
    products: tuple[Product, ...] = ()
    backups_keep: int = 14
    accounts: tuple[Account, ...] = ()
    # Sessions end after this long without use (a shared laptop); accounts lock after
    # lock_after wrong passwords in a row, for lock_minutes.
    idle_minutes: int = 15
    lock_after: int = 5
    lock_minutes: int = 15
    supply: SupplySettings = field(default_factory=SupplySettings)

    @property
    def tz(self) -> ZoneInfo:
        return ZoneInfo(self.timezone)

    def account(self, username: str) -> Account | None:
        for a in self.accounts:
            if a.username == username:
                return a
        return None


def _req(table: dict, key: str, where: str):
    if key not in table:
        raise ConfigError(f"{where}.{key} is missing from {CONFIG_FILE}")
    return table[key]


def parse_settings(doc: dict[str, Any], source: str = CONFIG_FILE) -> Settings:
    fac = doc.get("facility", {})
    care = doc.get("care", {})
    fid = str(_req(fac, "id", "facility"))
    if not fid or any(c in fid for c in "/\\ .") or len(fid) > 32:
        raise ConfigError(f"facility.id {fid!r} in {source}: use 1-32 letters, digits, '-' or '_'")
    kind = fac.get("kind", "clinic")
    if kind not in FACILITY_KINDS:
        raise ConfigError(f"facility.kind {kind!r} in {source}: allowed {', '.join(FACILITY_KINDS)}")
    tzname = fac.get("timezone", "UTC")
    try:
        ZoneInfo(tzname)
    except (ZoneInfoNotFoundError, ValueError):
        raise ConfigError(
            f"facility.timezone {tzname!r} in {source} is not an IANA time zone such as Africa/Nairobi"
        ) from None
    freq = float(care.get("rhd_negative_frequency", 0.15))
    if not 0 < freq < 1:
        raise ConfigError(f"care.rhd_negative_frequency {freq} in {source}: allowed range is above 0 and below 1")
    vol = float(care.get("maternal_blood_volume_ml", 5000))
    if not 2000 <= vol <= 10000:
        raise ConfigError(f"care.maternal_blood_volume_ml {vol} in {source}: allowed range 2000 to 10000")
    products = []
    for i, p in enumerate(doc.get("stock", {}).get("products", [])):
        vial = int(_req(p, "vial_iu", f"stock.products[{i}]"))
        if not 50 <= vial <= 15000:
            raise ConfigError(f"stock.products[{i}].vial_iu {vial} in {source}: allowed range 50 to 15000")
        products.append(Product(str(_req(p, "name", f"stock.products[{i}]")), vial, tuple(p.get("routes", ["IM"]))))
    accounts = []
    for i, a in enumerate(doc.get("accounts", [])):
        role = a.get("role", "midwife")
        if role not in ROLES:
            raise ConfigError(f"accounts[{i}].role {role!r} in {source}: allowed {', '.join(ROLES)}")
        accounts.append(
            Account(
                str(_req(a, "username", f"accounts[{i}]")),
                a.get("display_name", a["username"]),
                role,
                str(_req(a, "password_hash", f"accounts[{i}]")),
            )
        )
    keep = int(doc.get("backup", {}).get("keep", 14))
    if keep < 1:
        raise ConfigError(f"backup.keep {keep} in {source}: keep at least 1")
    security = {}
    sec = doc.get("security", {})
    for key, (default, lo, hi) in SECURITY_RANGES.items():
        v = sec.get(key, default)
        if isinstance(v, bool) or not isinstance(v, int) or not lo <= v <= hi:
            raise ConfigError(f"security.{key} {v!r} in {source}: a whole number from {lo} to {hi}")
        security[key] = v
    return Settings(
        facility_id=fid,
        facility_name=str(fac.get("name", fid)),
        facility_kind=kind,
        facility_phone=str(fac.get("phone", "")),
        district=str(fac.get("district", "")),
        timezone=tzname,
        profile=str(care.get("profile", "bsh-2014")),
        profile_overrides=dict(care.get("overrides", {})),
        rhd_negative_frequency=freq,
        maternal_blood_volume_ml=vol,
        products=tuple(products),
        backups_keep=keep,
        accounts=tuple(accounts),
        supply=parse_supply(doc.get("supply", {}), source),
        **security,
    )


def load_settings(data_dir: Path) -> Settings:
    path = Path(data_dir) / CONFIG_FILE
    if not path.exists():
        raise ConfigError(
            f"{path} does not exist: run `rhledger init --data {data_dir}` first "
            f"(or `rhledger demo` for the demo scenario)"
        )
    try:
        doc = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as e:
        raise ConfigError(f"{path} is not valid TOML: {e}") from None
    return parse_settings(doc, str(path))
