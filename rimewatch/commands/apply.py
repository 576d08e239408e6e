"""``rimewatch apply``: make the database hold what a site file describes."""

from __future__ import annotations

import click

from rimewatch.commands._store_common import (
    apply_and_report,
    db_option,
    load_site_file,
    open_database,
)


@click.command()
@click.argument("site_file", type=click.Path(dir_okay=False))
@db_option
def apply(site_file, db_url):
    """Create or update the site, its units and points from SITE_FILE.

    Units and points no longer in the file are marked retired; their readings are kept. Prints
    each change, and the safety cautions for the site's refrigerants.

    Example:

    \b
        rimewatch apply site.yaml --db sqlite:///data/rimewatch.db
    """
    from rimewatch.site import safety_notes

    config = load_site_file(site_file)
    engine = open_database(db_url)
    click.echo(f"site {config.site.name!r}:")
    apply_and_report(engine, config, quiet_when_unchanged=False)
    for note in safety_notes(config):
        click.echo(f"caution: {note}")
