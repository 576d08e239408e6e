"""``rimewatch points``: each mapped point with its last value and how old it is."""

from __future__ import annotations

import sys
import time

import click

from rimewatch.commands._store_common import db_option, open_database

# Physical kind -> display unit, per the site's display preference.
DISPLAY_UNITS = {
    "SI": {
        "pressure": "bar",
        "temperature": "degC",
        "power": "kW",
        "current": "A",
        "fraction": "%",
        "frequency": "Hz",
        "status": "on/off",
        "mass_flow": "kg/s",
        "volume_flow": "L/s",
    },
    "IP": {
        "pressure": "psig",
        "temperature": "degF",
        "power": "kW",
        "current": "A",
        "fraction": "%",
        "frequency": "Hz",
        "status": "on/off",
        "mass_flow": "lb/min",
        "volume_flow": "gpm",
    },
}


def format_age(seconds: float) -> str:
    """A short age: 42s, 7m, 3h, 12d."""
    for size, suffix in ((86400, "d"), (3600, "h"), (60, "m")):
        if seconds >= size:
            return f"{seconds / size:.0f}{suffix}"
    return f"{max(seconds, 0):.0f}s"


def format_value(value_si: float, kind: str, system: str, atmosphere_Pa: float) -> str:
    from rimewatch.ingest.units import from_si

    unit = DISPLAY_UNITS[system].get(kind)
    if unit is None:
        return f"{value_si:.4g} (SI)"
    if unit == "on/off":
        return "on" if value_si >= 0.5 else "off"
    shown = from_si(value_si, unit, atmospheric_pressure=atmosphere_Pa)
    return f"{shown:.4g} {unit if unit != 'bar' else 'bar abs'}"


@click.command()
@click.option("--site", "site_name", default=None, help="Only this site (its name).")
@click.option(
    "--stale-after",
    default=15.0,
    show_default=True,
    help="[min] a point whose last value is older than this is marked stale.",
)
@db_option
def points(site_name, stale_after, db_url):
    """List each mapped point with its last value (in the site's display units) and its age.

    Points with no value, or none newer than --stale-after minutes, are marked STALE.

    Example:

    \b
        rimewatch points --site "Birchfield Corner Grocery" --stale-after 30
    """
    from rich.console import Console
    from rich.table import Table
    from sqlalchemy import select, text

    from rimewatch.ingest.units import atmospheric_pressure, unit_kind
    from rimewatch.store import active_points
    from rimewatch.store.schema import Site

    engine = open_database(db_url)
    found = active_points(engine, site=site_name)
    if not found:
        where = f"site {site_name!r}" if site_name else "the database"
        raise click.ClickException(f"no points in {where}; load a site file with rimewatch apply")
    latest = text(
        "SELECT ts_ms, value FROM readings WHERE point_id = :p ORDER BY ts_ms DESC LIMIT 1"
    )
    now_s = time.time()
    table = Table("site", "unit", "role", "source", "last value", "age", "")
    stale_count = 0
    with engine.connect() as conn:
        systems = dict(conn.execute(select(Site.name, Site.display_units)).all())
        for point in found:
            row = conn.execute(latest, {"p": point.id}).first()
            source = ", ".join(
                s for s in (point.mqtt_topic and "mqtt", point.csv_column and "csv") if s
            )
            if row is None:
                value, age, stale = "-", "never", True
            else:
                ts_ms, value_si = row
                value = format_value(
                    value_si,
                    unit_kind(point.measurement_unit),
                    systems[point.site],
                    float(atmospheric_pressure(point.elevation_m)),
                )
                age_s = now_s - ts_ms / 1000.0
                age, stale = format_age(age_s), age_s > stale_after * 60.0
            stale_count += stale
            table.add_row(
                point.site,
                point.unit_key,
                point.role,
                source,
                value,
                age,
                "[bold red]STALE[/]" if stale else "",
            )
    Console(width=None if sys.stdout.isatty() else 160).print(table)
    click.echo(
        f"{len(found)} points, {stale_count} stale (no value in the last {stale_after:g} min)"
    )
