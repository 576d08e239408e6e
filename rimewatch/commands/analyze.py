"""``rimewatch analyze``: run fault detection over stored readings and record the events."""

from __future__ import annotations

import click

from rimewatch.commands._detect_common import (
    parse_time,
    resolve_tariff,
    select_units,
    tariff_option,
)
from rimewatch.commands._store_common import db_option, open_database


@click.command()
@click.option("--unit", "unit_key", default=None, help="Only this unit (its id in the site file).")
@click.option("--site", "site_name", default=None, help="Only this site (its name).")
@click.option(
    "--since", default=None, help="Start of the period (ISO 8601; default: 24 h before --until)."
)
@click.option(
    "--until", default=None, help="End of the period, exclusive (ISO 8601; default: now)."
)
@click.option(
    "--workers",
    type=click.IntRange(min=1),
    default=None,
    help="Processes sharing the units (default: one per CPU, at most one per 25 units).",
)
@tariff_option
@db_option
def analyze(unit_key, site_name, since, until, workers, tariff, db_url):
    """Detect and diagnose faults in each unit's stored readings over a period.

    Runs the sensor checks, then the diagnosis: against the unit's fault-free baseline when one
    was fitted (`rimewatch baseline`), else against the day-one rules of thumb. Findings that
    persist become events (see `rimewatch faults`). Running it again over the same data changes
    nothing. Diagnoses are automated: a licensed, certified technician must confirm them on site.

    Example:

    \b
        rimewatch analyze --since 2026-07-01 --until 2026-07-08
        rimewatch analyze --unit rtu-1 --since 2026-07-07T00:00Z
    """
    import pandas as pd

    from rimewatch.detection import analyze_stored_units, default_workers

    end = parse_time(until, "--until", pd.Timestamp.now(tz="UTC").floor("1min"))
    start = parse_time(since, "--since", end - pd.Timedelta("24h"))
    if not start < end:
        raise click.ClickException(f"--since {start} must be before --until {end}")
    engine = open_database(db_url)
    units = select_units(engine, unit_key, site_name)
    workers = workers or default_workers(len(units))
    results = analyze_stored_units(
        engine, units, start, end, resolve_tariff(tariff), workers=workers
    )
    failures = 0
    for result in results:
        name = f"{result.site}/{result.unit}"
        if result.error:
            failures += 1
            click.echo(f"{name}: not analysed: {result.error}", err=True)
            continue
        stats, counts = result.stats, result.counts
        click.echo(
            f"{name}: {result.mode}; {stats['steady_minutes']} steady of "
            f"{stats['running_minutes']} running minutes, {stats['hours_judged']} hours judged; "
            f"events: {counts.inserted} new, {counts.updated} updated, {counts.unchanged} "
            f"unchanged, {result.closed} closed"
        )
        for event in result.events:
            state = "open" if event.end is None else f"cleared {event.end:%Y-%m-%d %H:%M}"
            detail = f" ({event.detail})" if event.detail else ""
            click.echo(
                f"  {event.code}{detail} since {event.start:%Y-%m-%d %H:%M}Z, {state}, "
                f"{event.severity_label}, confidence {event.confidence:.0%}"
            )
    if failures == len(results):
        raise click.ClickException("no unit could be analysed")
