"""CSV: one tidy row per month x facility x indicator (numerator, denominator, percentage).

An empty denominator means the indicator is a count; an empty percentage means the
denominator is 0 or the indicator is a count. No names: follow-up lists are separate
(``follow_up_csv``) and only for roles that may see names.

Every text cell that a spreadsheet would read as a formula (it begins with =, +, -, @, a
tab or a carriage return) is written with a leading apostrophe and rows end with CRLF
(clinic.records.csv_cells), so nothing typed at a clinic runs as a formula on the district's
computer.
"""
from __future__ import annotations

import csv
import io

from clinic.records.csv_cells import LINE_END, safe_cell, safe_dict, safe_row
from clinic.reports.coverage import DISTRICT, INDICATORS, MonthReport
from clinic.reports.month import Month

COLUMNS = ("month", "facility", "facility_name", "section", "indicator", "title",
           "numerator", "denominator", "percentage")


def _num(v):
    return "" if v is None else v


def coverage_csv(reports: dict[Month, MonthReport] | list[MonthReport]) -> str:
    """The rows of every report given (oldest month first), district last in each month."""
    items = sorted(reports.values() if isinstance(reports, dict) else reports, key=lambda r: r.month)
    out = io.StringIO()
    w = csv.writer(out, lineterminator=LINE_END)
    w.writerow(COLUMNS)
    for rep in items:
        for fac in rep.columns:
            for ind in INDICATORS:
                c = rep.cell(fac, ind.id)
                w.writerow(safe_row([str(rep.month), "district" if fac == DISTRICT else fac, rep.facility_name(fac),
                            ind.section, ind.id, ind.title, c.numerator, _num(c.denominator),
                            _num(c.percentage)]))
    return out.getvalue()


FOLLOW_UP_COLUMNS = ("facility", "last_seen_at", "indicator", "what", "due_local", "name",
                     "register_no", "phone", "village", "woman_id", "pregnancy_id", "record_id")


def follow_up_rows(report: MonthReport, women: dict[str, dict], tz) -> list[dict]:
    """Follow-up list with names: only for roles with the follow-up permission (roles.FOLLOW_UP)."""
    rows = []
    for fu in report.follow_up + report.sensitisations:
        w = women.get(fu.woman_id, {})
        rows.append({
            "facility": fu.facility, "last_seen_at": fu.last_facility, "indicator": fu.indicator,
            "what": fu.what, "due_local": fu.due.astimezone(tz).strftime("%Y-%m-%d %H:%M") if fu.due else "",
            "name": w.get("name", ""), "register_no": w.get("register_no", ""), "phone": w.get("phone", ""),
            "village": w.get("village", ""), "woman_id": fu.woman_id, "pregnancy_id": fu.pregnancy_id,
            "record_id": fu.record_id or "",
        })
    return rows


def follow_up_csv(report: MonthReport, women: dict[str, dict], tz) -> str:
    out = io.StringIO()
    w = csv.DictWriter(out, FOLLOW_UP_COLUMNS, lineterminator=LINE_END)
    w.writeheader()
    for row in follow_up_rows(report, women, tz):
        w.writerow(safe_dict(row))
    return out.getvalue()


__all__ = ["coverage_csv", "follow_up_csv", "follow_up_rows", "safe_cell"]
