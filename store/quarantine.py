"""Quarantine: input that could not become readings, kept verbatim with a readable reason."""

from __future__ import annotations

import time
from collections.abc import Iterable
from dataclasses import dataclass

from sqlalchemy import Connection, Engine, Row, insert, select, update

from rimewatch.store.schema import Quarantine

MAX_PAYLOAD_BYTES = 65536


def now_ms() -> int:
    """The current time as UTC epoch milliseconds."""
    return time.time_ns() // 1_000_000


@dataclass(frozen=True)
class QuarantineEntry:
    """One rejected piece of input.

    source : ``"mqtt"`` or ``"csv"``.
    origin : the MQTT topic or the CSV file path.
    line : the CSV line number (1 = header line), None for MQTT.
    payload : the raw bytes or text (longer than MAX_PAYLOAD_BYTES is cut, and the reason says so).
    reason : what is wrong, for a person.
    received_ms : when it arrived [ms since the Unix epoch, UTC]; None = now.
    site_id : the site it belongs to when known.
    """

    source: str
    origin: str
    line: int | None
    payload: bytes | str
    reason: str
    received_ms: int | None = None
    site_id: int | None = None


def _row(entry: QuarantineEntry, received_default: int) -> dict:
    payload = entry.payload.encode("utf-8") if isinstance(entry.payload, str) else entry.payload
    reason = entry.reason
    if len(payload) > MAX_PAYLOAD_BYTES:
        reason = f"{reason} (payload of {len(payload)} bytes cut to {MAX_PAYLOAD_BYTES})"
        payload = payload[:MAX_PAYLOAD_BYTES]
    return {
        "source": entry.source,
        "origin": entry.origin,
        "line": entry.line,
        "payload": bytes(payload),
        "reason": reason,
        "received_ms": entry.received_ms if entry.received_ms is not None else received_default,
        "site_id": entry.site_id,
        "reprocessed": False,
    }


def write_quarantine(target: Engine | Connection, entries: Iterable[QuarantineEntry]) -> int:
    """Store rejected input; returns how many entries were written. With a Connection the caller
    commits; with an Engine the write commits on its own."""
    received = now_ms()
    rows = [_row(entry, received) for entry in entries]
    if not rows:
        return 0
    if isinstance(target, Engine):
        with target.begin() as conn:
            conn.execute(insert(Quarantine), rows)
    else:
        target.execute(insert(Quarantine), rows)
    return len(rows)


def pending_quarantine(
    target: Engine | Connection, source: str | None = None, include_reprocessed: bool = False
) -> list[Row]:
    """Quarantine rows (attributes as the table's columns) in arrival order, by default only
    those not yet reprocessed."""
    query = select(Quarantine.__table__).order_by(Quarantine.id)
    if source is not None:
        query = query.where(Quarantine.source == source)
    if not include_reprocessed:
        query = query.where(Quarantine.reprocessed.is_(False))
    if isinstance(target, Engine):
        with target.connect() as conn:
            return list(conn.execute(query).all())
    return list(target.execute(query).all())


def mark_reprocessed(conn: Connection, ids: Iterable[int]) -> int:
    """Flag entries whose content has now been stored as readings (the caller commits)."""
    ids = list(ids)
    stamp = now_ms()
    for first in range(0, len(ids), 500):
        conn.execute(
            update(Quarantine)
            .where(Quarantine.id.in_(ids[first : first + 500]))
            .values(reprocessed=True, reprocessed_ms=stamp)
        )
    return len(ids)
