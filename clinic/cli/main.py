"""Entry point of the `rhledger` console script. Each command group lives in its own module."""
from __future__ import annotations

import click

from clinic.cli import calc_cmds, card_cmds, report_cmds, store_cmds, supply_cmds, users_cmds, web_cmds


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="rhledger")
def cli():
    """rhledger: RhD typing, antibody screens and anti-D prophylaxis for a clinic, offline.

    Decision support only: confirm every dose against the product label and local protocol.
    """


for module in (store_cmds, users_cmds, web_cmds, calc_cmds, card_cmds, report_cmds, supply_cmds):
    module.register(cli)


if __name__ == "__main__":  # pragma: no cover
    cli()
