"""Dating a pregnancy: EDD from LMP, GA from crown-rump length, which dating to use, GA on a day.

GA is counted in whole days from the dating origin (the LMP, or EDD - 280 days). A
date-time is turned into a day in the facility's time zone first, so a birth at 23:50
local time counts on that local day even when UTC has already moved on.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import date, datetime, timedelta, timezone, tzinfo

from clinic.care.errors import CareInputError, require_range
from clinic.records.values import format_ga, parse_ga

# Naegele's rule as ACOG Committee Opinion 700 (2017) applies it: EDD = LMP + 280 days.
PREGNANCY_DAYS = 280

# Robinson HP, Fleming JEE. A critical evaluation of sonar "crown-rump length" measurements.
# Br J Obstet Gynaecol 1975;82:702-710: GA (days) = 8.052 * sqrt(CRL mm) + 23.73,
# for CRL 3 to 84 mm (the field limits in schema.py).
RF_SLOPE = 8.052
RF_INTERCEPT = 23.73
CRL_MIN_MM, CRL_MAX_MM = 3.0, 84.0


def _as_date(value, field: str) -> date:
    if isinstance(value, datetime):
        raise CareInputError(field, "must be a date (YYYY-MM-DD), not a date-time")
    if isinstance(value, date):
        return value
    try:
        return date.fromisoformat(str(value).strip())
    except ValueError:
        raise CareInputError(field, f"{value!r} is not a date (YYYY-MM-DD)") from None


def edd_from_lmp(lmp) -> date:
    """Naegele's rule: EDD = first day of the LMP + 280 days (ACOG CO 700, 2017)."""
    return _as_date(lmp, "lmp") + timedelta(days=PREGNANCY_DAYS)


def edd_naegele_calendar(lmp) -> date:
    """Naegele's rule in its calendar form: LMP + 1 year - 3 months + 7 days.

    It can differ from LMP + 280 days by a day or two, depending on the months crossed;
    shown beside the 280-day EDD for comparison only.
    """
    d = _as_date(lmp, "lmp") + timedelta(days=7)
    y, m = d.year, d.month - 3
    if m < 1:
        m += 12
        y -= 1
    y += 1
    last = (date(y + (m == 12), m % 12 + 1, 1) - timedelta(days=1)).day
    return date(y, m, min(d.day, last))


def origin_from_edd(edd) -> date:
    return _as_date(edd, "edd") - timedelta(days=PREGNANCY_DAYS)


def local_date(when, tz: tzinfo | None = None) -> date:
    """The calendar day of ``when`` at the facility (a date is returned as it is)."""
    if isinstance(when, datetime):
        if when.tzinfo is None:
            raise CareInputError("on", "a date-time must carry its time zone")
        return when.astimezone(tz or timezone.utc).date()
    return _as_date(when, "on")


def ga_on(on, *, lmp=None, edd=None, tz: tzinfo | None = None) -> int:
    """GA in whole days on a date or aware date-time, from the LMP or from the EDD."""
    if (lmp is None) == (edd is None):
        raise CareInputError("lmp", "give either the LMP or the EDD")
    origin = _as_date(lmp, "lmp") if lmp is not None else origin_from_edd(edd)
    return (local_date(on, tz) - origin).days


def ga_from_crl(crl_mm) -> float:
    """GA in days (unrounded) from crown-rump length, Robinson & Fleming 1975."""
    crl = require_range("crl_mm", crl_mm, CRL_MIN_MM, CRL_MAX_MM, unit="mm")
    return RF_SLOPE * math.sqrt(crl) + RF_INTERCEPT


def ga_days_from_crl(crl_mm) -> int:
    """GA from CRL rounded to the nearest whole day."""
    return int(math.floor(ga_from_crl(crl_mm) + 0.5))


def profile_thresholds(profile) -> list[tuple[int, int]]:
    """The profile's ``dating.redate_thresholds`` as the (below_ga_days, days) pairs of ``choose_dating``."""
    return [(parse_ga(t["below_ga"]), int(t["days"])) for t in profile.get("dating.redate_thresholds")]


def redate_threshold_days(scan_ga_days: int, thresholds) -> int:
    """Largest LMP-scan difference (days) kept without re-dating, for the GA (by LMP) at the scan.

    ``thresholds``: [(below_ga_days, days), ...] sorted ascending (ACOG CO 700 Table 1).
    """
    for below, days in thresholds:
        if scan_ga_days < below:
            return days
    raise CareInputError("scan_ga_days", f"{format_ga(scan_ga_days)} is beyond the re-dating table "
                                         f"(up to {format_ga(thresholds[-1][0] - 1)})")


@dataclass(frozen=True)
class Dating:
    """The dating a plan uses: the EDD, how it was set, and why."""

    edd: date
    method: str          # "lmp", "scan" or "edd"
    reason: str
    source: str
    lmp_edd: date | None = None
    scan_edd: date | None = None
    difference_days: int | None = None

    @property
    def origin(self) -> date:
        return self.edd - timedelta(days=PREGNANCY_DAYS)

    def ga_days(self, when, tz: tzinfo | None = None) -> int:
        return (local_date(when, tz) - self.origin).days

    def date_at(self, ga_days: int) -> date:
        return self.origin + timedelta(days=ga_days)


def choose_dating(*, lmp=None, scan_on=None, scan_crl_mm=None, scan_ga_days=None, agreed_edd=None,
                  rule: str = "acog-co700", thresholds=(), source: str = "") -> Dating:
    """Pick the dating: an agreed EDD wins; else LMP and/or scan by the profile's rule.

    rule "acog-co700": keep the LMP unless the scan differs by more than the threshold for
    the GA by LMP on the day of the scan (ACOG CO 700, 2017, Table 1); "scan-preferred": a scan, when present,
    sets the EDD (NICE NG201); "lmp-preferred": the LMP, when present.
    """
    lmp_edd = edd_from_lmp(lmp) if lmp is not None else None
    scan_edd = None
    sga = None
    if scan_on is not None and (scan_crl_mm is not None or scan_ga_days is not None):
        s_on = _as_date(scan_on, "scan_on")
        sga = ga_days_from_crl(scan_crl_mm) if scan_crl_mm is not None else int(scan_ga_days)
        scan_edd = s_on + timedelta(days=PREGNANCY_DAYS - sga)
    diff = (lmp_edd - scan_edd).days if (lmp_edd and scan_edd) else None
    if agreed_edd is not None:
        return Dating(_as_date(agreed_edd, "edd"), "edd", "the EDD agreed at booking is used", source,
                      lmp_edd, scan_edd, diff)
    if lmp_edd is None and scan_edd is None:
        raise CareInputError("lmp", "no dating: give the LMP, a dating scan (CRL or GA), or the agreed EDD")
    if scan_edd is None:
        assert lmp_edd is not None  # one of the two was set (checked above)
        return Dating(lmp_edd, "lmp", "dated by the LMP (no dating scan)", source, lmp_edd, None, None)
    assert sga is not None  # a scan EDD is only made from a scan GA
    how = f"CRL {scan_crl_mm:g} mm" if scan_crl_mm is not None else f"GA {format_ga(sga)} by scan"
    if lmp_edd is None:
        return Dating(scan_edd, "scan", f"dated by the scan ({how}; no LMP)", source, None, scan_edd, None)
    if rule == "scan-preferred":
        return Dating(scan_edd, "scan", f"dated by the scan ({how}); the scan sets the EDD when done", source,
                      lmp_edd, scan_edd, diff)
    if rule == "lmp-preferred":
        return Dating(lmp_edd, "lmp", "dated by the LMP", source, lmp_edd, scan_edd, diff)
    assert diff is not None  # both EDDs are known from here on
    # ACOG CO 700 Table 1 reads the GA range by the LMP at the time of the scan (from memory).
    lga = (s_on - _as_date(lmp, "lmp")).days
    limit = redate_threshold_days(max(lga, 0), thresholds)
    if abs(diff) > limit:
        return Dating(scan_edd, "scan", f"re-dated by the scan ({how}): LMP and scan differ by {abs(diff)} days, "
                                        f"more than {limit} days at {format_ga(lga)} by LMP", source, lmp_edd,
                      scan_edd, diff)
    return Dating(lmp_edd, "lmp", f"dated by the LMP: the scan ({how}) differs by {abs(diff)} days, "
                                  f"within {limit} days at {format_ga(lga)} by LMP", source, lmp_edd, scan_edd, diff)
