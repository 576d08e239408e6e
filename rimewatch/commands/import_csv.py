"""``rimewatch import``: load a trend-log CSV export into the database."""

from __future__ import annotations

from pathlib import Path

import click

from rimewatch.commands._store_common import (
    apply_and_report,
    db_option,
    load_site_file,
    open_database,
)


@click.command("import")
@click.argument("site_file", type=click.Path(dir_okay=False))
@click.argument("csv_file", type=click.Path(dir_okay=False))
@click.option("--unit", "unit_id", default=None, help="Import only this unit's columns.")
@db_option
def import_command(site_file, csv_file, unit_id, db_url):
    """Import CSV_FILE, a trend-log export, using the columns and format of SITE_FILE.

    Applies SITE_FILE first. Values are converted to SI and checked; bad cells and lines go to
    quarantine with their line numbers (see `rimewatch quarantine list`). Importing the same file
    again adds nothing.

    Example:

    \b
        rimewatch import site.yaml exports/2024-rtu1.csv --unit rtu-1
    """
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    from rimewatch.ingest.csv_import import CsvImportError, count_lines, import_csv
    from rimewatch.site_sync import csv_targets

    config = load_site_file(site_file)
    path = Path(csv_file)
    if not path.is_file():
        raise click.ClickException(f"{path}: no such file")
    engine = open_database(db_url)
    apply_and_report(engine, config)
    try:
        fmt, columns, site_id = csv_targets(engine, config, unit_id)
    except KeyError as exc:
        raise click.ClickException(f"{site_file}: {exc.args[0]}") from None
    if not columns:
        raise click.ClickException(f"{site_file}: no point has a csv_column")
    total = max(count_lines(path) - 1, 0)
    with Progress(
        "[progress.description]{task.description}",
        BarColumn(),
        MofNCompleteColumn(),
        TimeElapsedColumn(),
        transient=True,
    ) as progress:
        task = progress.add_task(f"importing {path.name}", total=total)
        try:
            result = import_csv(
                engine,
                path,
                fmt,
                columns,
                config.atmospheric_pressure_Pa,
                site_id=site_id,
                progress=lambda done: progress.update(task, completed=done),
            )
        except CsvImportError as exc:
            raise click.ClickException(str(exc)) from None
    click.echo(
        f"{path}: {result.lines} lines, {result.readings_stored} readings stored, "
        f"{result.readings_already_stored} already stored, {result.cells_empty} empty cells, "
        f"{result.quarantined} quarantined"
    )
    if result.columns_ignored:
        click.echo(f"  columns not mapped to a point: {', '.join(result.columns_ignored)}")
    if result.columns_missing:
        click.echo(f"  mapped columns not in the file: {', '.join(result.columns_missing)}")
    if result.quarantined:
        click.echo("  see: rimewatch quarantine list")
