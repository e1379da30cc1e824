"""`rhledger forecast`: anti-D needed per facility and product, stock-out dates, lots expiring
unused, orders and (at a district) suggested transfers. Thin over clinic.reports.supply."""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

import click

from clinic.cli.common import clean_errors, data_option, resolve_data
from clinic.cli.report_cmds import LIBRARY_ERRORS, _now, _store
from clinic.supply.errors import SupplyInputError


def _write_atomic(path: Path, text: str) -> None:
    """Nothing half-written: a temporary file beside the target, then renamed over it."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


@click.command("forecast")
@data_option
@click.option("--weeks", type=click.IntRange(1, 52), default=None,
              help="Weeks ahead (default: [supply] horizon_weeks in config.toml, 12 if not set).")
@click.option("--format", "fmt", type=click.Choice(("json", "csv")), default="json", show_default=True,
              help="json (docs/supply-forecast.md) or csv (one tidy table).")
@click.option("--out", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="File to write (default: print).")
@click.option("--as-of", default=None, help="Forecast as at this UTC time (default: now).")
@clean_errors(*LIBRARY_ERRORS, SupplyInputError)
def forecast_cmd(data, weeks, fmt, out, as_of):
    """Anti-D needed in the coming weeks, per facility and vial size, against the stock on hand.

    A clinic forecasts itself; a district installation forecasts every clinic whose bundles it
    imported and suggests transfers of lots that would expire unused. A forecast is an estimate
    from the records entered: confirm with the pharmacy.
    """
    from clinic.reports.supply import supply_report
    from clinic.supply.render import csv_text, json_text

    data_dir = resolve_data(data)
    rep = supply_report(_store(data_dir), data_dir, now=_now(as_of), weeks=weeks)
    text = csv_text(rep) if fmt == "csv" else json_text(rep)
    if out is None:
        click.echo(text, nl=False)
        return
    _write_atomic(out, text)
    outs = sum(1 for r in rep.rows() if r.stock.stockout_date)
    n = len(rep.transfers)
    click.echo(f"Wrote {out} ({fmt}, {rep.weeks} weeks from {rep.start}): {len(rep.facilities)} "
               f"facilit{'y' if len(rep.facilities) == 1 else 'ies'}, {outs} stock-out{'' if outs == 1 else 's'} "
               f"ahead, {n} transfer{'' if n == 1 else 's'} suggested.")


def register(cli: click.Group) -> None:
    cli.add_command(forecast_cmd)
