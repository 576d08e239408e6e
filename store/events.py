"""Detection's tables: baselines, events (with severity history), notes, maintenance windows.

Typed models on the same declarative base as :mod:`rimewatch.store.schema`; the Alembic
migration ``d001_detection`` creates them. Times are UTC epoch milliseconds (``*_ms``), as
everywhere in the store. JSON payloads (a baseline's models, an event's impact and ranking) are
plain JSON text.

Events are keyed by (unit, code, detail, start). :func:`merge_events` writes the events of an
analysis run so that running it again over the same data changes nothing: an incoming event that
overlaps a stored one of the same unit, code and detail extends that one (its key and start stay)
instead of adding a second.
"""

from __future__ import annotations

import json
from dataclasses import dataclass

from sqlalchemy import (
    BigInteger,
    Boolean,
    Connection,
    Engine,
    Float,
    ForeignKey,
    Integer,
    String,
    Text,
    UniqueConstraint,
    and_,
    or_,
    select,
    update,
)
from sqlalchemy.orm import Mapped, mapped_column

from rimewatch.store.schema import Base, Site, Unit


class BaselineRecord(Base):
    """A unit's fault-free reference models (JSON) and their training window."""

    __tablename__ = "baselines"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    unit_id: Mapped[int] = mapped_column(ForeignKey("units.id"), index=True)
    created_ms: Mapped[int] = mapped_column(BigInteger)
    train_start_ms: Mapped[int] = mapped_column(BigInteger)
    train_end_ms: Mapped[int] = mapped_column(BigInteger)
    models_json: Mapped[str] = mapped_column(Text)
    active: Mapped[bool] = mapped_column(Boolean, default=True)


class EventRecord(Base):
    """A fault event; ``end_ms`` NULL while open."""

    __tablename__ = "events"
    __table_args__ = (UniqueConstraint("unit_id", "code", "detail", "start_ms"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    unit_id: Mapped[int] = mapped_column(ForeignKey("units.id"), index=True)
    code: Mapped[str] = mapped_column(String(40))
    detail: Mapped[str] = mapped_column(String(200), default="")
    start_ms: Mapped[int] = mapped_column(BigInteger)
    end_ms: Mapped[int | None] = mapped_column(BigInteger)
    detected_ms: Mapped[int] = mapped_column(BigInteger)
    last_seen_ms: Mapped[int] = mapped_column(BigInteger)
    severity: Mapped[float] = mapped_column(Float)
    confidence: Mapped[float] = mapped_column(Float)
    impact_json: Mapped[str] = mapped_column(Text, default="{}")
    ranking_json: Mapped[str] = mapped_column(Text, default="[]")
    evidence: Mapped[str] = mapped_column(Text, default="")
    suppressed: Mapped[bool] = mapped_column(Boolean, default=False)
    acknowledged_ms: Mapped[int | None] = mapped_column(BigInteger)
    acknowledged_by: Mapped[str | None] = mapped_column(String(200))


class EventHistory(Base):
    """Severity and confidence of an event per hour it was found."""

    __tablename__ = "event_history"

    event_id: Mapped[int] = mapped_column(ForeignKey("events.id"), primary_key=True)
    hour_ms: Mapped[int] = mapped_column(BigInteger, primary_key=True, autoincrement=False)
    severity: Mapped[float] = mapped_column(Float)
    confidence: Mapped[float] = mapped_column(Float)


class NoteRecord(Base):
    """A person's note on an event."""

    __tablename__ = "notes"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    event_id: Mapped[int] = mapped_column(ForeignKey("events.id"), index=True)
    created_ms: Mapped[int] = mapped_column(BigInteger)
    author: Mapped[str] = mapped_column(String(200))
    text: Mapped[str] = mapped_column(Text)


class MaintenanceWindow(Base):
    """A period a unit is under maintenance: events starting in it are stored suppressed."""

    __tablename__ = "maintenance"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    unit_id: Mapped[int] = mapped_column(ForeignKey("units.id"), index=True)
    start_ms: Mapped[int] = mapped_column(BigInteger)
    end_ms: Mapped[int | None] = mapped_column(BigInteger)
    note: Mapped[str] = mapped_column(Text, default="")


@dataclass(frozen=True)
class IncomingEvent:
    """An event from an analysis run, in store terms (times epoch ms, JSON-ready dicts)."""

    code: str
    detail: str
    start_ms: int
    end_ms: int | None
    detected_ms: int
    last_seen_ms: int
    severity: float
    confidence: float
    impact: dict
    ranking: list
    evidence: str
    history: tuple  # ((hour_ms, severity, confidence), ...)


@dataclass(frozen=True)
class MergeCounts:
    inserted: int = 0
    updated: int = 0
    unchanged: int = 0


def _run(target: Engine | Connection, work):
    if isinstance(target, Engine):
        with target.begin() as conn:
            return work(conn)
    return work(target)


def save_baseline(
    target, unit_id: int, models: dict, start_ms: int, end_ms: int, now_ms: int
) -> int:
    """Store a baseline as the unit's active one (earlier ones stay, inactive). Returns its id."""

    def work(conn: Connection) -> int:
        conn.execute(
            update(BaselineRecord).where(BaselineRecord.unit_id == unit_id).values(active=False)
        )
        return conn.execute(
            BaselineRecord.__table__.insert().values(
                unit_id=unit_id,
                created_ms=now_ms,
                train_start_ms=start_ms,
                train_end_ms=end_ms,
                models_json=json.dumps(models, sort_keys=True),
                active=True,
            )
        ).inserted_primary_key[0]

    return _run(target, work)


def active_baseline(target, unit_id: int) -> dict | None:
    """The unit's active baseline as the JSON dict it was stored from, or None."""

    def work(conn: Connection):
        text = conn.execute(
            select(BaselineRecord.models_json).where(
                BaselineRecord.unit_id == unit_id, BaselineRecord.active.is_(True)
            )
        ).scalar_one_or_none()
        return None if text is None else json.loads(text)

    return _run(target, work)


def _in_maintenance(conn: Connection, unit_id: int, at_ms: int) -> bool:
    window = conn.execute(
        select(MaintenanceWindow.id).where(
            MaintenanceWindow.unit_id == unit_id,
            MaintenanceWindow.start_ms <= at_ms,
            or_(MaintenanceWindow.end_ms.is_(None), MaintenanceWindow.end_ms > at_ms),
        )
    ).first()
    return window is not None


def _values(event: IncomingEvent) -> dict:
    return {
        "end_ms": event.end_ms,
        "last_seen_ms": event.last_seen_ms,
        "confidence": event.confidence,
        "impact_json": json.dumps(event.impact, sort_keys=True),
        "ranking_json": json.dumps(event.ranking),
        "evidence": event.evidence,
    }


def merge_events(target, unit_id: int, incoming: list[IncomingEvent]) -> MergeCounts:
    """Write one unit's events from an analysis run; idempotent (see the module docstring)."""

    def work(conn: Connection) -> MergeCounts:
        inserted = updated = unchanged = 0
        table = EventRecord.__table__
        for event in incoming:
            end = event.end_ms if event.end_ms is not None else 2**62
            stored = conn.execute(
                select(table)
                .where(
                    table.c.unit_id == unit_id,
                    table.c.code == event.code,
                    table.c.detail == event.detail,
                    table.c.start_ms <= end,
                    or_(table.c.end_ms.is_(None), table.c.end_ms >= event.start_ms),
                )
                .order_by(table.c.start_ms)
            ).first()
            if stored is None:
                event_id = conn.execute(
                    table.insert().values(
                        unit_id=unit_id,
                        code=event.code,
                        detail=event.detail,
                        start_ms=event.start_ms,
                        detected_ms=event.detected_ms,
                        severity=event.severity,
                        suppressed=_in_maintenance(conn, unit_id, event.start_ms),
                        **_values(event),
                    )
                ).inserted_primary_key[0]
                inserted += 1
            else:
                event_id = stored.id
                changes = {}
                if event.severity > stored.severity:
                    changes["severity"] = event.severity
                if event.detected_ms < stored.detected_ms and event.start_ms <= stored.start_ms:
                    changes["detected_ms"] = event.detected_ms
                if event.last_seen_ms >= stored.last_seen_ms:
                    for name, value in _values(event).items():
                        if getattr(stored, name) != value:
                            changes[name] = value
                if changes:
                    conn.execute(update(table).where(table.c.id == event_id).values(**changes))
                    updated += 1
                else:
                    unchanged += 1
            _add_history(conn, event_id, event.history)
        return MergeCounts(inserted, updated, unchanged)

    return _run(target, work)


def _add_history(conn: Connection, event_id: int, history) -> None:
    if not history:
        return
    table = EventHistory.__table__
    known = set(conn.execute(select(table.c.hour_ms).where(table.c.event_id == event_id)).scalars())
    rows = [
        {"event_id": event_id, "hour_ms": h, "severity": s, "confidence": c}
        for h, s, c in history
        if h not in known
    ]
    if rows:
        conn.execute(table.insert(), rows)


def list_events(
    target,
    unit_ids: list[int] | None = None,
    include_suppressed: bool = False,
    open_only: bool = False,
) -> list[dict]:
    """Stored events with their site and unit keys, newest start first."""

    def work(conn: Connection) -> list[dict]:
        table = EventRecord.__table__
        query = (
            select(table, Unit.key.label("unit"), Site.name.label("site"))
            .join(Unit, Unit.id == table.c.unit_id)
            .join(Site, Site.id == Unit.site_id)
            .order_by(table.c.start_ms.desc(), table.c.id.desc())
        )
        if unit_ids is not None:
            query = query.where(table.c.unit_id.in_(unit_ids))
        if not include_suppressed:
            query = query.where(table.c.suppressed.is_(False))
        if open_only:
            query = query.where(table.c.end_ms.is_(None))
        rows = [dict(row._mapping) for row in conn.execute(query)]
        for row in rows:
            row["impact"] = json.loads(row.pop("impact_json") or "{}")
            row["ranking"] = json.loads(row.pop("ranking_json") or "[]")
        return rows

    return _run(target, work)


def close_event(target, event_id: int, end_ms: int) -> int:
    """Close an open event at ``end_ms``; returns 1 when it was open, else 0."""

    def work(conn: Connection) -> int:
        table = EventRecord.__table__
        result = conn.execute(
            update(table)
            .where(table.c.id == event_id, table.c.end_ms.is_(None))
            .values(end_ms=end_ms)
        )
        return result.rowcount

    return _run(target, work)


def acknowledge_event(target, event_id: int, by: str, at_ms: int) -> bool:
    """Mark an event acknowledged; False when there is no such event."""

    def work(conn: Connection) -> bool:
        table = EventRecord.__table__
        result = conn.execute(
            update(table)
            .where(table.c.id == event_id)
            .values(acknowledged_ms=at_ms, acknowledged_by=by)
        )
        return result.rowcount > 0

    return _run(target, work)


def add_note(target, event_id: int, author: str, text: str, at_ms: int) -> int:
    """Attach a note to an event; returns the note's id. LookupError when the event is unknown."""

    def work(conn: Connection) -> int:
        exists = conn.execute(
            select(EventRecord.id).where(EventRecord.id == event_id)
        ).scalar_one_or_none()
        if exists is None:
            raise LookupError(f"no event with id {event_id}")
        return conn.execute(
            NoteRecord.__table__.insert().values(
                event_id=event_id, created_ms=at_ms, author=author, text=text
            )
        ).inserted_primary_key[0]

    return _run(target, work)


def notes_for(target, event_ids: list[int]) -> dict[int, list[dict]]:
    """Notes per event id, oldest first."""

    def work(conn: Connection):
        table = NoteRecord.__table__
        out: dict[int, list[dict]] = {}
        if not event_ids:
            return out
        rows = conn.execute(
            select(table).where(table.c.event_id.in_(event_ids)).order_by(table.c.created_ms)
        )
        for row in rows:
            out.setdefault(row.event_id, []).append(
                {"created_ms": row.created_ms, "author": row.author, "text": row.text}
            )
        return out

    return _run(target, work)


def set_maintenance(target, unit_id: int, on: bool, at_ms: int, note: str = "") -> bool:
    """Open (``on``) or close the unit's maintenance window; False when nothing changed.

    Opening also suppresses the unit's events that are open at that moment; closing shows again
    the events still open then (a fault that outlasts the maintenance is real).
    """

    def work(conn: Connection) -> bool:
        table = MaintenanceWindow.__table__
        current = conn.execute(
            select(table.c.id).where(table.c.unit_id == unit_id, table.c.end_ms.is_(None))
        ).scalar_one_or_none()
        if on:
            if current is not None:
                return False
            conn.execute(table.insert().values(unit_id=unit_id, start_ms=at_ms, note=note))
            events = EventRecord.__table__
            conn.execute(
                update(events)
                .where(and_(events.c.unit_id == unit_id, events.c.end_ms.is_(None)))
                .values(suppressed=True)
            )
            return True
        if current is None:
            return False
        conn.execute(update(table).where(table.c.id == current).values(end_ms=at_ms))
        events = EventRecord.__table__
        conn.execute(
            update(events)
            .where(and_(events.c.unit_id == unit_id, events.c.end_ms.is_(None)))
            .values(suppressed=False)
        )
        return True

    return _run(target, work)


def in_maintenance(target, unit_id: int, at_ms: int) -> bool:
    """Whether the unit is under maintenance at ``at_ms``."""
    return _run(target, lambda conn: _in_maintenance(conn, unit_id, at_ms))
