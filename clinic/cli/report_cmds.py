"""District commands: export and import bundles, the monthly report, the anti-D stock ledger.

Thin over clinic.reports: each command turns library errors into one clear message.
"""
from __future__ import annotations

from datetime import datetime, timezone
from pathlib import Path

import click

from clinic.cli.common import clean_errors, data_option, emit_json, fail, open_store, resolve_data, write_file
from clinic.config import ConfigError
from clinic.printing.errors import PrintError
from clinic.records.validate import ValidationError
from clinic.reports.bundle import BundleError
from clinic.reports.coverage import ReportError
from clinic.reports.month import MonthFormatError
from clinic.signing.errors import SigningError
from clinic.store.errors import StoreError

LIBRARY_ERRORS = (StoreError, ValidationError, ConfigError, SigningError, BundleError, ReportError,
                  MonthFormatError, PrintError, OSError)
FORMATS = ("csv", "pdf", "json", "fhir", "fhir-records", "follow-up")


def _now(as_of: str | None) -> datetime:
    if not as_of:
        return datetime.now(timezone.utc)
    try:
        dt = datetime.fromisoformat(as_of.replace("Z", "+00:00"))
    except ValueError:
        fail(f"--as-of {as_of!r}: write a UTC time such as 2026-12-02T08:00:00Z")
    return dt if dt.tzinfo else dt.replace(tzinfo=timezone.utc)


def _store(data_dir: Path):

    return open_store(data_dir)


@click.command("export")
@data_option
@click.option("--since", default="LAST", show_default=True,
              help="LAST (everything new or changed since the last export), or a UTC time "
                   "such as 2026-11-01T00:00:00Z (everything created or amended since then).")
@click.option("--out", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Bundle file to write (default <data>/exports/<facility>-<time>.rhlb).")
@click.option("--as-of", default=None, hidden=True, help="Pretend it is this UTC time (tests, demo).")
@clean_errors(*LIBRARY_ERRORS)
def export_cmd(data, since, out, as_of):
    """Write a signed bundle of this clinic's records for the district (USB stick or any transfer)."""
    from clinic.reports.bundle import export_bundle

    data_dir = resolve_data(data)
    store = _store(data_dir)
    res = export_bundle(store, data_dir, facility=store.settings.facility_id, out=out, since=since,
                        now=_now(as_of))
    kinds = ", ".join(f"{n} {k}" for k, n in sorted(res.kinds.items())) or "no records"
    click.echo(f"Wrote {res.path}: {res.count} records ({kinds}), changed since "
               f"{res.since or 'the beginning'} up to {res.until}.")
    click.echo(f"SHA-256 {res.sha256}")


@click.command("import")
@data_option
@click.argument("files", nargs=-1, required=True, type=click.Path(dir_okay=False, path_type=Path))
@click.option("--json", "as_json", is_flag=True, help="Print the results as JSON.")
@click.option("--as-of", default=None, hidden=True, help="Pretend it is this UTC time (tests, demo).")
@clean_errors(*LIBRARY_ERRORS)
def import_cmd(data, files, as_json, as_of):
    """Import clinic bundles. Each is checked whole first; a refused bundle imports nothing.

    Importing the same bundle again changes nothing; bundles may come in any order.
    """
    from clinic.reports.bundle import import_files

    data_dir = resolve_data(data)
    results = import_files(_store(data_dir), data_dir, files, now=_now(as_of))
    if as_json:
        emit_json([r.to_dict() for r in results])
    else:
        for r in results:
            click.echo(("OK       " if r.status == "imported" else "REFUSED  ") + r.message,
                       err=r.status != "imported")
    refused = [r for r in results if r.status != "imported"]
    if refused:
        fail(f"{len(refused)} of {len(results)} bundles refused (nothing of them imported); see above")


@click.command("import-log")
@data_option
@clean_errors(*LIBRARY_ERRORS)
def import_log_cmd(data):
    """Show which bundles were imported or refused, when, and the counts."""
    from clinic.reports.bundle import import_log

    for e in import_log(resolve_data(data)):
        click.echo(f"{e.get('at')}  {e.get('status'):<9} {e.get('facility') or '-':<12} {e.get('count', 0):>6}  "
                   f"{e.get('name')}  {e.get('reason') or ''}")


@click.command("report")
@data_option
@click.option("--month", required=True, help="The month, YYYY-MM (local time of the district).")
@click.option("--format", "fmt", type=click.Choice(FORMATS), required=True,
              help="csv (tidy rows, 12 months), pdf (meeting), json (our shape), fhir (MeasureReports), "
                   "fhir-records (individual-level FHIR Bundle, names), follow-up (CSV of names).")
@click.option("--out", type=click.Path(dir_okay=False, path_type=Path), required=True, help="File to write.")
@click.option("--months", default=12, show_default=True, type=click.IntRange(1, 36),
              help="Months in the trend (charts, CSV).")
@click.option("--as-of", default=None, help="Judge the plans as at this UTC time (default: now).")
@clean_errors(*LIBRARY_ERRORS)
def report_cmd(data, month, fmt, out, months, as_of):
    """The monthly coverage report, per facility and for the district.

    The csv, pdf, json and fhir outputs carry no names. fhir-records and follow-up carry
    names: keep them for staff whose role may see names.
    """
    from clinic.reports import outputs
    from clinic.reports.month import Month

    data_dir = resolve_data(data)
    m = Month.parse(month)
    store = _store(data_dir)
    content = outputs.render(store, data_dir, m, fmt, now=_now(as_of), months=months)
    write_file(out, content if isinstance(content, bytes) else content.encode("utf-8"))
    click.echo(f"Wrote {out} ({fmt}, {m.title}).")


@click.group("stock")
def stock_group():
    """The facility's anti-D stock ledger: received, given, discarded, cold-chain break."""


@stock_group.command("add")
@data_option
@click.option("--move", type=click.Choice(("received", "given", "discarded", "cold-chain-break",
                                           "count-correction")), required=True,
              help="What happened (count-correction: the vials counted on the shelf).")
@click.option("--product", required=True, help="Product name as on the box.")
@click.option("--vial-iu", type=int, required=True, help="Vial size in IU (250 µg = 1250 IU).")
@click.option("--lot", required=True, help="Lot number.")
@click.option("--expiry", required=True, help="Lot expiry date YYYY-MM-DD.")
@click.option("--vials", type=int, required=True, help="Number of vials (a positive count).")
@click.option("--at", "at", default=None, help="When (local time YYYY-MM-DDTHH:MM; default now).")
@click.option("--by", "by", required=True, help="Your user name.")
@click.option("--notes", default="", help="Notes (e.g. why discarded).")
@clean_errors(*LIBRARY_ERRORS)
def stock_add_cmd(data, move, product, vial_iu, lot, expiry, vials, at, by, notes):
    """Record one stock movement."""
    store = _store(resolve_data(data))
    now = datetime.now(timezone.utc)
    raw = {"move": move, "at": at or now, "product": product, "vial_iu": vial_iu, "lot": lot,
           "lot_expiry": expiry, "vials": vials}
    if notes:
        raw["notes"] = notes
    rec = store.create("stock", raw, by=by, facility=store.settings.facility_id, now=now).record
    click.echo(f"Recorded {move} of {vials} vial(s) of lot {lot} ({rec['id']}).")


@stock_group.command("show")
@data_option
@click.option("--json", "as_json", is_flag=True, help="Print as JSON.")
@clean_errors(*LIBRARY_ERRORS)
def stock_show_cmd(data, as_json):
    """Stock on hand per lot now, and lots expiring within 60 days."""
    from clinic.reports.stock import balances

    store = _store(resolve_data(data))
    now = datetime.now(timezone.utc)
    rows = balances(store.iter_records(kind="stock"), at=now, day=now.astimezone(store.tz).date())
    if as_json:
        emit_json([dict(r.__dict__, iu=r.iu) for r in rows])
        return
    if not rows:
        click.echo("No stock movements recorded.")
    for b in rows:
        flag = "EXPIRED" if b.expired else ("expires within 60 days" if b.expires_soon else "")
        click.echo(f"{b.facility:<12} {b.product[:34]:<34} {b.vial_iu:>6} IU  lot {b.lot:<12} exp {b.lot_expiry}  "
                   f"{b.vials:>4} vials  {flag}")


def register(cli: click.Group) -> None:
    for cmd in (export_cmd, import_cmd, import_log_cmd, report_cmd, stock_group):
        cli.add_command(cmd)

