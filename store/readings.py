"""Writing readings in bulk, idempotently, and reading a unit's points back as one wide frame."""

from __future__ import annotations

import itertools
from collections.abc import Iterable, Sequence

import numpy as np
import pandas as pd
from sqlalchemy import Connection, Engine, text

from rimewatch.store.columnar import open_columnar

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
    if isinstance(target, Engine):
        with FrameReader(target) as reader:
            return reader.read(unit_id, start, end)
    # a caller's connection may hold uncommitted rows: read through it
    start_ms, end_ms = to_epoch_ms(start), to_epoch_ms(end)
    points = _points(target, unit_id)
    return _frame(points, _dbapi_columns(target, points, start_ms, end_ms))


class FrameReader:
    """Reads units' wide frames (as :func:`read_unit_frame`) one after another, for many units.

    Where an ADBC driver serves the database (SQLite files, PostgreSQL) the readings arrive as
    Arrow columns, with no Python object per reading (:mod:`rimewatch.store.columnar`); else
    through the DB-API driver. Use as a context manager; it holds one extra connection.
    """

    def __init__(self, engine: Engine) -> None:
        self._engine = engine
        self._columnar = open_columnar(engine)
        # a server answers one query per unit faster than one per point (measured on
        # PostgreSQL: 9 vs 13 ms a unit-day); SQLite steps through one point's rows fastest
        self._query_per_unit = engine.url.get_backend_name() != "sqlite"

    def __enter__(self) -> FrameReader:
        return self

    def __exit__(self, *_exc) -> None:
        self.close()

    @property
    def columnar(self) -> bool:
        """Whether readings arrive through the ADBC driver."""
        return self._columnar is not None

    def close(self) -> None:
        if self._columnar is not None:
            self._columnar.close()
            self._columnar = None

    def read(self, unit_id: int, start, end) -> pd.DataFrame:
        start_ms, end_ms = to_epoch_ms(start), to_epoch_ms(end)
        with self._engine.connect() as conn:
            points = _points(conn, unit_id)
            if self._columnar is None:
                return _frame(points, _dbapi_columns(conn, points, start_ms, end_ms))
        if not points or not self._query_per_unit:
            queries = [_SELECT_POINT.format(int(p), int(start_ms), int(end_ms)) for p, _ in points]
            return _frame(points, self._columnar.fetch_many(queries, (np.int64, np.float64)))
        ids = ", ".join(str(int(p)) for p, _ in points)
        query = _SELECT_POINTS.format(ids, int(start_ms), int(end_ms))
        [(point_ids, times, values)] = self._columnar.fetch_many(
            [query], (np.int64, np.int64, np.float64)
        )
        wanted = np.array([p for p, _ in points], dtype=np.int64)
        first = np.searchsorted(point_ids, wanted, side="left")
        last = np.searchsorted(point_ids, wanted, side="right")
        columns = [[times[a:b], values[a:b]] for a, b in zip(first, last, strict=True)]
        return _frame(points, columns)


_SELECT_POINT = (
    "SELECT ts_ms, value FROM readings WHERE point_id = {0} AND ts_ms >= {1} AND ts_ms < {2} "
    "ORDER BY ts_ms"
)
_SELECT_POINTS = (
    "SELECT point_id, ts_ms, value FROM readings WHERE point_id IN ({0}) "
    "AND ts_ms >= {1} AND ts_ms < {2} ORDER BY point_id, ts_ms"
)


def _points(conn: Connection, unit_id: int) -> list[tuple[int, str]]:
    return [
        (int(point_id), role)
        for point_id, role in conn.execute(
            text("SELECT id, role FROM points WHERE unit_id = :unit_id ORDER BY id"),
            {"unit_id": unit_id},
        )
    ]


def _dbapi_columns(
    conn: Connection, points: list[tuple[int, str]], start_ms: int, end_ms: int
) -> list[list[np.ndarray]]:
    """(times [ms], values) of each point through the DB-API driver's own cursor."""
    marker = "?" if conn.dialect.paramstyle == "qmark" else "%s"
    sql = _SELECT_POINT.format(marker, marker, marker)
    cursor = conn.connection.dbapi_connection.cursor()
    try:
        columns = []
        for point_id, _ in points:
            cursor.execute(sql, (point_id, start_ms, end_ms))
            rows = cursor.fetchall()
            flat = itertools.chain.from_iterable(rows)  # no per-row Row objects
            pairs = np.fromiter(flat, np.float64, count=2 * len(rows)).reshape(-1, 2)
            columns.append([pairs[:, 0].astype(np.int64), pairs[:, 1]])
    finally:
        cursor.close()
    return columns


def _frame(points: list[tuple[int, str]], columns: list[list[np.ndarray]]) -> pd.DataFrame:
    if not points:
        return pd.DataFrame(index=_utc_index(np.empty(0, dtype=np.int64)))
    return pd.DataFrame(*_widen(columns), columns=[role for _, role in points])


def _widen(columns: list[list[np.ndarray]]) -> tuple[np.ndarray, pd.DatetimeIndex]:
    """(times [ms], values) per point, each sorted by time -> wide values and their index."""
    stamps = max((times for times, _ in columns), key=len)
    places = [np.searchsorted(stamps, times) for times, _ in columns]
    if not all(_found(stamps, c[0], at) for c, at in zip(columns, places, strict=True)):
        stamps = _sorted_union([times for times, _ in columns])
        places = [np.searchsorted(stamps, times) for times, _ in columns]
    # usually every point reports at the longest one's instants: no union to build
    wide = np.full((len(stamps), len(columns)), np.nan, order="F")
    for j, ((_, values), at) in enumerate(zip(columns, places, strict=True)):
        wide[at, j] = values
    return wide, _utc_index(stamps)


def _sorted_union(runs: list[np.ndarray]) -> np.ndarray:
    """The distinct values of sorted arrays, sorted (a stable sort merges sorted runs fast)."""
    merged = np.sort(np.concatenate(runs), kind="stable")
    first = np.ones(len(merged), dtype=bool)
    np.not_equal(merged[1:], merged[:-1], out=first[1:])
    return merged[first]


def _found(stamps: np.ndarray, times: np.ndarray, at: np.ndarray) -> bool:
    """Whether every one of the sorted ``times`` is among ``stamps`` (``at`` = their places)."""
    return len(at) == 0 or (at[-1] < len(stamps) and np.array_equal(stamps[at], times))


def _utc_index(epoch_ms: np.ndarray) -> pd.DatetimeIndex:
    return pd.DatetimeIndex(pd.to_datetime(epoch_ms, unit="ms", utc=True).as_unit("us"), name="ts")
