"""The database schema: typed SQLAlchemy 2 models for sites, units, points, readings and quarantine.

Times are UTC epoch milliseconds in BIGINT columns (``*_ms``): compact, exact, identical on SQLite
and PostgreSQL, and free of the naive-datetime round trip SQLite's DATETIME emulation has.
Readings are SI floats. The Alembic migrations in ``migrations/versions`` create exactly these
tables; a test compares the two.
"""

from __future__ import annotations

from typing import ClassVar

from sqlalchemy import (
    BigInteger,
    Boolean,
    Float,
    ForeignKey,
    Index,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Text,
    UniqueConstraint,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column

# Stable constraint names, so later migrations can alter them on every backend.
NAMING_CONVENTION = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=NAMING_CONVENTION)


class Site(Base):
    __tablename__ = "sites"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(200), unique=True)
    timezone: Mapped[str] = mapped_column(String(64))
    elevation_m: Mapped[float] = mapped_column(Float)
    display_units: Mapped[str] = mapped_column(String(8))


class Unit(Base):
    """One refrigeration circuit; ``description`` keeps the full unit block from the site file as
    JSON (compressor map included) for the parts that need more than the columns."""

    __tablename__ = "units"
    __table_args__ = (UniqueConstraint("site_id", "key"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id"))
    key: Mapped[str] = mapped_column(String(100))
    name: Mapped[str] = mapped_column(String(200))
    kind: Mapped[str] = mapped_column(String(40))
    refrigerant: Mapped[str] = mapped_column(String(40))
    description: Mapped[str] = mapped_column(Text)
    retired: Mapped[bool] = mapped_column(Boolean, default=False)


class Point(Base):
    """A measurement of one role on one unit, with its source and the unit its values arrive in."""

    __tablename__ = "points"
    __table_args__ = (UniqueConstraint("unit_id", "role"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    unit_id: Mapped[int] = mapped_column(ForeignKey("units.id"))
    role: Mapped[str] = mapped_column(String(60))
    measurement_unit: Mapped[str] = mapped_column(String(20))
    mqtt_topic: Mapped[str | None] = mapped_column(Text)
    csv_column: Mapped[str | None] = mapped_column(Text)
    retired: Mapped[bool] = mapped_column(Boolean, default=False)


class Reading(Base):
    """One sample: SI value of a point at a UTC instant. WITHOUT ROWID on SQLite keeps each row at
    about 24 bytes on disk (measured by benchmarks/csv_import.py)."""

    __tablename__ = "readings"
    __table_args__: ClassVar[dict] = {"sqlite_with_rowid": False}

    point_id: Mapped[int] = mapped_column(ForeignKey("points.id"), primary_key=True)
    ts_ms: Mapped[int] = mapped_column(BigInteger, primary_key=True, autoincrement=False)
    value: Mapped[float] = mapped_column(Float)


class Quarantine(Base):
    """Input that could not be stored as readings, kept verbatim with the reason."""

    __tablename__ = "quarantine"
    __table_args__ = (Index("ix_quarantine_reprocessed_source", "reprocessed", "source"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    source: Mapped[str] = mapped_column(String(16))
    origin: Mapped[str] = mapped_column(Text)
    line: Mapped[int | None] = mapped_column(Integer)
    payload: Mapped[bytes] = mapped_column(LargeBinary)
    reason: Mapped[str] = mapped_column(Text)
    received_ms: Mapped[int] = mapped_column(BigInteger)
    site_id: Mapped[int | None] = mapped_column(ForeignKey("sites.id"))
    reprocessed: Mapped[bool] = mapped_column(Boolean, default=False)
    reprocessed_ms: Mapped[int | None] = mapped_column(BigInteger)
