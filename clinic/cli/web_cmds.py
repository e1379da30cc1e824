"""`rhledger serve` and `rhledger demo`: the web app on this laptop."""
from __future__ import annotations

from pathlib import Path

import click

from clinic.cli.common import clean_errors, data_option, fail, resolve_data
from clinic.config import ConfigError

DEFAULT_PORT = 5080


def _net_options(fn):
    fn = click.option("--port", type=click.IntRange(0, 65535), default=DEFAULT_PORT, show_default=True,
                      help="TCP port.")(fn)
    fn = click.option("--host", default=None,
                      help="Address to listen on (default 127.0.0.1, this laptop only; with --lan 0.0.0.0).")(fn)
    return fn


def _run(data_dir: Path, host: str | None, port: int, threads: int, lan: bool) -> None:
    from clinic.store import StoreError
    from clinic.web import create_app

    try:
        app = create_app(data_dir)
    except (ConfigError, StoreError) as e:
        fail(str(e))
    for warning in app.extensions["rhledger"].get("file_warnings", []):
        click.echo(f"Warning: {warning}", err=True)
    from clinic.web.housekeeping import start_daily_backups

    start_daily_backups(app.extensions["rhledger"]["store"])
    if lan:
        from clinic.web.lan import serve_https

        serve_https(app, host or "0.0.0.0", port, data_dir)
        return
    import waitress

    host = host or "127.0.0.1"
    click.echo(f"rhledger: http://{'127.0.0.1' if host in ('0.0.0.0', '') else host}:{port}/  (Ctrl+C to stop)")
    waitress.serve(app, host=host, port=port, threads=threads, ident="rhledger")


def register(cli: click.Group) -> None:
    @cli.command()
    @data_option
    @_net_options
    @click.option("--threads", type=click.IntRange(1, 64), default=8, show_default=True,
                  help="Worker threads of the server.")
    @click.option("--lan", is_flag=True,
                  help="Serve phones on the clinic network over HTTPS (certificate made by rhledger; "
                       "phones start at the setup page).")
    @clean_errors(ConfigError)
    def serve(data, host, port, threads, lan):
        """Serve the clinic app (pages and /api/v1) from this laptop.

        Decision support only: confirm every dose against the product label and local protocol.
        """
        _run(resolve_data(data), host, port, threads, lan)

    @cli.command()
    @data_option
    @_net_options
    @click.option("--site", default="clinic-a", show_default=True,
                  help="Which demo installation to build (see seed_demo.scenario.SITES).")
    @click.option("--no-serve", is_flag=True, help="Only write the demo data; do not start the server.")
    @click.option("--force", is_flag=True, help="Replace an existing (non-empty) data directory.")
    @click.option("--lan", is_flag=True, help="Serve over HTTPS to phones on the clinic network.")
    def demo(data, host, port, site, no_serve, force, lan):
        """A fresh data directory with the invented demo scenario, then serve it.

        Prints the address and the demo sign-in. Refuses to touch a non-empty data
        directory unless --force. All people and places in the demo are invented.
        """
        from seed_demo.scenario import SITES, DemoError, build_site

        if site not in SITES:
            fail(f"--site {site!r} is not a demo site; choose one of: {', '.join(SITES)}")
        data_dir = resolve_data(data)
        if data_dir.exists() and data_dir.is_dir() and any(data_dir.iterdir()) and not force:
            fail(f"{data_dir} is not empty; choose another --data directory or pass --force to replace it "
                 f"with fresh demo data")
        try:
            summary = build_site(data_dir, site=site, force=force)
        except DemoError as e:
            fail(str(e))
        shown_host = "127.0.0.1" if host in (None, "", "0.0.0.0") else host
        scheme = "https" if lan else "http"
        click.echo(f"Demo data for {summary.get('facility_name', site)} written to {data_dir}")
        click.echo(f"Open {scheme}://{shown_host}:{port}{summary.get('url_path') or '/'}")
        for acct in summary.get("accounts", []):
            user, password = acct[0], acct[1]
            role = f" ({acct[2]})" if len(acct) > 2 else ""
            click.echo(f"  sign in as {user} / {password}{role}")
        for note in summary.get("notes", []) or []:
            click.echo(f"  - {note}")
        click.echo("Invented people and places only. Decision support only: confirm every dose against the "
                   "product label and local protocol.")
        if no_serve:
            return
        _run(data_dir, host, port, 8, lan)
