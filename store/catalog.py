"""Looking up what the database knows about sites, units and points."""

from __future__ import annotations

from dataclasses import dataclass

from sqlalchemy import Connection, Engine, select

from rimewatch.store.schema import Point, Site, Unit


@dataclass(frozen=True)
class PointInfo:
    """An active (not retired) point with what an ingester needs to decode and store its values."""

    id: int
    site: str
    site_id: int
    unit_key: str
    unit_id: int
    role: str
    measurement_unit: str
    mqtt_topic: str | None
    csv_column: str | None
    elevation_m: float


def _points_query(site: str | None):
    query = (
        select(
            Point.id,
            Site.name,
            Site.id,
            Unit.key,
            Unit.id,
            Point.role,
            Point.measurement_unit,
            Point.mqtt_topic,
            Point.csv_column,
            Site.elevation_m,
        )
        .join(Unit, Point.unit_id == Unit.id)
        .join(Site, Unit.site_id == Site.id)
        .where(Point.retired.is_(False), Unit.retired.is_(False))
        .order_by(Site.name, Unit.key, Point.id)
    )
    return query if site is None else query.where(Site.name == site)


def active_points(target: Engine | Connection, site: str | None = None) -> list[PointInfo]:
    """Every active point, optionally of one site (by name), ordered by site, unit and point."""
    query = _points_query(site)
    if isinstance(target, Engine):
        with target.connect() as conn:
            rows = conn.execute(query).all()
    else:
        rows = target.execute(query).all()
    return [PointInfo(*row) for row in rows]


def find_unit_id(target: Engine | Connection, site: str, unit_key: str) -> int | None:
    """The database id of a site's unit, or None."""
    query = (
        select(Unit.id)
        .join(Site, Unit.site_id == Site.id)
        .where(Site.name == site, Unit.key == unit_key)
    )
    if isinstance(target, Engine):
        with target.connect() as conn:
            return conn.execute(query).scalar_one_or_none()
    return target.execute(query).scalar_one_or_none()
