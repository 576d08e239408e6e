"""Shared by the store commands: the --db option, and library errors turned into one line."""

from __future__ import annotations

import click

db_option = click.option(
    "--db",
    "db_url",
    default=None,
    metavar="URL",
    help="Database URL (default: $RIMEWATCH_DB, else sqlite:///rimewatch.db in this folder).",
)


def open_database(db_url: str | None):
    from rimewatch.store import DatabaseURLError, connect

    try:
        return connect(db_url)
    except DatabaseURLError as exc:
        raise click.ClickException(str(exc)) from None
    except Exception as exc:  # driver errors: unreachable server, unwritable file
        raise click.ClickException(f"cannot open the database: {exc}") from None


def load_site_file(path: str):
    from rimewatch.site import SiteConfigError, load_site

    try:
        return load_site(path)
    except SiteConfigError as exc:
        raise click.ClickException(str(exc)) from None


def apply_and_report(engine, config, quiet_when_unchanged: bool = True) -> list[str]:
    from rimewatch.site import SiteConfigError
    from rimewatch.site_sync import apply_site

    try:
        changes = apply_site(engine, config)
    except SiteConfigError as exc:
        raise click.ClickException(str(exc)) from None
    for change in changes:
        click.echo(f"  {change}")
    if not changes and not quiet_when_unchanged:
        click.echo("  the database already matches the site file")
    return changes
