"""Writing readings in bulk, idempotently, and reading a unit's points back as one wide frame."""

from __future__ import annotations

import itertools
from collections.abc import Iterable, Sequence

import numpy as np
import pandas as pd
from sqlalchemy import Connection, Engine, text

_INSERT = (
    "INSERT INTO readings (point_id, ts_ms, value) VALUES ({0}, {0}, {0}) ON CONFLICT DO NOTHING"
)
# DB-API parameter style of the driver -> the bulk insert statement
_INSERT_SQL = {"qmark": _INSERT.format("?"), "format": _INSERT.format("%s")}
_INSERT_SQL["pyformat"] = _INSERT_SQL["format"]


def _insert_many(conn: Connection, rows: Sequence[tuple[int, int, float]]) -> int:
    sql = _INSERT_SQL[conn.dialect.paramstyle]
    result = conn.exec_driver_sql(sql, rows)
    return max(result.rowcount, 0)


def write_readings(target: Engine | Connection, rows: Iterable[tuple[int, int, float]]) -> int:
    """Store readings; a reading already stored (same point and time) is left as it was.

    Parameters
    ----------
    target : an Engine (the write runs and commits in its own transaction) or a Connection (the
        caller commits, e.g. before acknowledging the messages the rows came from).
    rows : ``(point_id, ts_ms, value)`` with plain Python ``int``, ``int`` [ms since the Unix epoch,
        UTC] and finite ``float`` [SI]. Validate first: NaN is not a storable value.

    Returns
    -------
    int : rows newly stored (duplicates not counted).
    """
    rows = rows if isinstance(rows, Sequence) else list(rows)
    if not rows:
        return 0
    if isinstance(target, Engine):
        with target.begin() as conn:
            return _insert_many(conn, rows)
    return _insert_many(target, rows)


def to_epoch_ms(moment) -> int:
    """A timezone-aware instant (datetime, Timestamp, ISO 8601 text with offset) -> epoch [ms]."""
    stamp = pd.Timestamp(moment)
    if stamp.tzinfo is None:
        raise ValueError(f"time {moment!r} has no time zone; give an offset or 'Z' for UTC")
    return int(stamp.timestamp() * 1000)


def read_unit_frame(target: Engine | Connection, unit_id: int, start, end) -> pd.DataFrame:
    """Readings of every point of one unit in ``[start, end)`` as a wide frame.

    Returns
    -------
    DataFrame indexed by UTC time (``datetime64[us, UTC]``, named ``ts``), one float column per
    point role in point order (retired points included: their history stays), NaN where a point
    has no sample at that instant.
    """
    start_ms, end_ms = to_epoch_ms(start), to_epoch_ms(end)
    if isinstance(target, Engine):
        with target.connect() as conn:
            return _read_unit_frame(conn, unit_id, start_ms, end_ms)
    return _read_unit_frame(target, unit_id, start_ms, end_ms)


def _read_unit_frame(conn: Connection, unit_id: int, start_ms: int, end_ms: int) -> pd.DataFrame:
    points = conn.execute(
        text("SELECT id, role FROM points WHERE unit_id = :unit_id ORDER BY id"),
        {"unit_id": unit_id},
    ).all()
    if not points:
        return pd.DataFrame(index=_utc_index(np.empty(0, dtype=np.int64)))
    marker = "?" if conn.dialect.paramstyle == "qmark" else "%s"
    sql = (
        f"SELECT ts_ms, value FROM readings WHERE point_id = {marker} "
        f"AND ts_ms >= {marker} AND ts_ms < {marker} ORDER BY ts_ms"
    )
    # One query per point, in primary-key order, on the driver's own cursor: plain tuples
    # flattened straight into numpy (no per-row Row objects, no nested-list conversion).
    cursor = conn.connection.dbapi_connection.cursor()
    try:
        columns = []
        for point_id, _ in points:
            cursor.execute(sql, (point_id, start_ms, end_ms))
            rows = cursor.fetchall()
            flat = itertools.chain.from_iterable(rows)
            columns.append(np.fromiter(flat, np.float64, count=2 * len(rows)).reshape(-1, 2))
    finally:
        cursor.close()
    return pd.DataFrame(*_widen(columns), columns=[p[1] for p in points])


def _widen(columns: list[np.ndarray]) -> tuple[np.ndarray, pd.DatetimeIndex]:
    """(time [ms], value) pairs per point, each sorted by time -> wide values and their index."""
    stamps = max(columns, key=len)[:, 0]
    places = [np.searchsorted(stamps, c[:, 0]) for c in columns]
    if not all(_found(stamps, c[:, 0], at) for c, at in zip(columns, places, strict=True)):
        stamps = np.unique(np.concatenate([c[:, 0] for c in columns]))
        places = [np.searchsorted(stamps, c[:, 0]) for c in columns]
    # usually every point reports at the longest one's instants: no union to build
    wide = np.full((len(stamps), len(columns)), np.nan, order="F")
    for j, (column, at) in enumerate(zip(columns, places, strict=True)):
        wide[at, j] = column[:, 1]
    return wide, _utc_index(stamps.astype(np.int64))


def _found(stamps: np.ndarray, times: np.ndarray, at: np.ndarray) -> bool:
    """Whether every one of the sorted ``times`` is among ``stamps`` (``at`` = their places)."""
    return len(at) == 0 or (at[-1] < len(stamps) and np.array_equal(stamps[at], times))


def _utc_index(epoch_ms: np.ndarray) -> pd.DatetimeIndex:
    return pd.DatetimeIndex(pd.to_datetime(epoch_ms, unit="ms", utc=True).as_unit("us"), name="ts")
