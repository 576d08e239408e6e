"""Make the database hold what a site file describes (``rimewatch apply``).

Sites, units and points are matched by name, unit id and role. New ones are added, changed ones
updated, and units or points no longer in the file are marked retired: their readings stay.
"""

from __future__ import annotations

import json

from sqlalchemy import Engine, select
from sqlalchemy.orm import Session

from rimewatch.ingest.csv_import import ColumnTarget, CsvFormat
from rimewatch.site import SiteConfig, UnitConfig
from rimewatch.store import active_points
from rimewatch.store.schema import Point, Site, Unit


def _unit_description(config: SiteConfig, unit: UnitConfig) -> str:
    description = unit.model_dump(mode="json", exclude={"points", "compressor_map_file"})
    description["compressor_map"] = config.compressor_map_for(unit)
    return json.dumps(description, sort_keys=True)


def _update(record, values: dict, label: str, changes: list[str]) -> None:
    for field, value in values.items():
        old = getattr(record, field)
        if old != value:
            if field != "description":
                changes.append(f"changed {label}: {field} {old!r} -> {value!r}")
            else:
                changes.append(f"changed {label}: equipment description")
            setattr(record, field, value)


def apply_site(engine: Engine, config: SiteConfig) -> list[str]:
    """Upsert the site, its units and points; returns one line per change (empty: none)."""
    changes: list[str] = []
    with Session(engine) as session, session.begin():
        info = config.site
        site = session.scalars(select(Site).where(Site.name == info.name)).one_or_none()
        site_values = {
            "timezone": info.timezone,
            "elevation_m": info.elevation_m,
            "display_units": info.display_units,
        }
        if site is None:
            site = Site(name=info.name, **site_values)
            session.add(site)
            session.flush()
            changes.append(f"added site {info.name!r}")
        else:
            _update(site, site_values, f"site {info.name!r}", changes)

        units = {u.key: u for u in session.scalars(select(Unit).where(Unit.site_id == site.id))}
        for unit_config in config.units:
            values = {
                "name": unit_config.name,
                "kind": unit_config.kind,
                "refrigerant": unit_config.refrigerant,
                "description": _unit_description(config, unit_config),
                "retired": False,
            }
            unit = units.pop(unit_config.id, None)
            if unit is None:
                unit = Unit(site_id=site.id, key=unit_config.id, **values)
                session.add(unit)
                session.flush()
                changes.append(f"added unit {unit_config.id}")
            else:
                _update(unit, values, f"unit {unit_config.id}", changes)
            _apply_points(session, unit, unit_config, changes)
        for unit in units.values():
            if not unit.retired:
                unit.retired = True
                changes.append(f"retired unit {unit.key} (its readings are kept)")
            for point in session.scalars(select(Point).where(Point.unit_id == unit.id)):
                point.retired = True
    return changes


def _apply_points(session: Session, unit: Unit, unit_config: UnitConfig, changes: list[str]):
    points = {p.role: p for p in session.scalars(select(Point).where(Point.unit_id == unit.id))}
    for point_config in unit_config.points:
        label = f"point {unit_config.id}/{point_config.role}"
        values = {
            "measurement_unit": point_config.unit,
            "mqtt_topic": point_config.mqtt_topic,
            "csv_column": point_config.csv_column,
            "retired": False,
        }
        point = points.pop(point_config.role, None)
        if point is None:
            session.add(Point(unit_id=unit.id, role=point_config.role, **values))
            changes.append(f"added {label}")
        else:
            _update(point, values, label, changes)
    for point in points.values():
        if not point.retired:
            point.retired = True
            changes.append(f"retired point {unit_config.id}/{point.role} (its readings are kept)")


def csv_targets(
    engine: Engine, config: SiteConfig, unit_id: str | None = None
) -> tuple[CsvFormat, dict[str, ColumnTarget], int]:
    """The CSV format, the column -> point mapping (of one unit when ``unit_id`` is given) and
    the site's database id, for an applied site file.

    Raises
    ------
    KeyError
        When ``unit_id`` is not a unit of the site.
    """
    units = [config.unit(unit_id)] if unit_id is not None else config.units
    stored = {(p.unit_key, p.role): p for p in active_points(engine, site=config.site.name)}
    columns = {}
    for unit in units:
        for point in unit.points:
            if point.csv_column is not None:
                info = stored[(unit.id, point.role)]
                name = f"{unit.id}/{point.role}"
                columns[point.csv_column] = ColumnTarget(info.id, name, point.role, point.unit)
    settings = config.csv
    fmt = CsvFormat(
        timestamp_column=settings.timestamp_column,
        timestamp_format=settings.timestamp_format,
        timezone=config.csv_timezone,
        delimiter=settings.delimiter,
        decimal=settings.decimal,
        encoding=settings.encoding,
        missing_values=tuple(settings.missing_values),
        chunk_rows=settings.chunk_rows,
    )
    site_id = engine_site_id(engine, config.site.name)
    return fmt, columns, site_id


def engine_site_id(engine: Engine, site_name: str) -> int:
    """The database id of a site (KeyError when it has not been applied)."""
    with engine.connect() as conn:
        site_id = conn.execute(select(Site.id).where(Site.name == site_name)).scalar_one_or_none()
    if site_id is None:
        raise KeyError(f"site {site_name!r} is not in the database; run `rimewatch apply` first")
    return site_id
