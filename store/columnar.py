"""Readings fetched as numpy columns through an ADBC driver (Apache Arrow Database Connectivity).

The DB-API drivers (sqlite3, psycopg) build a Python tuple, int and float for every row; at fleet
scale (tens of millions of readings) that costs more than the analysis. The ADBC drivers for
SQLite and PostgreSQL step through the rows in C and hand back Arrow buffers, which become numpy
arrays without a Python object per reading. Engines they cannot serve (an in-memory SQLite
database, other dialects) return ``None`` from :func:`open_columnar` and the caller keeps the
DB-API path.
"""

from __future__ import annotations

from pathlib import Path

import adbc_driver_manager
import nanoarrow
import numpy as np
from sqlalchemy import Engine

#: Arrow format string of a column -> numpy dtype
_DTYPES = {"l": np.int64, "g": np.float64, "i": np.int32, "f": np.float32}


def _database(engine: Engine):
    url = engine.url
    backend = url.get_backend_name()
    if backend == "sqlite":
        name = url.database
        if not name or name == ":memory:" or name.startswith("file:"):
            return None
        import adbc_driver_sqlite

        return adbc_driver_sqlite.connect(Path(name).resolve().as_uri())
    if backend == "postgresql":
        import adbc_driver_postgresql

        libpq_url = url.set(drivername="postgresql").render_as_string(hide_password=False)
        return adbc_driver_postgresql.connect(libpq_url)
    return None


class ColumnarConnection:
    """One ADBC connection; :meth:`fetch` runs a query and returns its columns as numpy arrays."""

    def __init__(self, database) -> None:
        self._database = database
        self._connection = adbc_driver_manager.AdbcConnection(database)

    def fetch(self, sql: str, dtypes: tuple[type, ...]) -> list[np.ndarray]:
        """The numeric, NOT NULL columns of ``sql``'s result as arrays of ``dtypes``.

        ``sql`` is sent as it is (no parameters): build it from trusted values only.
        """
        statement = adbc_driver_manager.AdbcStatement(self._connection)
        try:
            statement.set_sql_query(sql)
            handle, _ = statement.execute_query()
            parts: list[list[np.ndarray]] = [[] for _ in dtypes]
            for batch in nanoarrow.c_array_stream(handle):
                view = batch.view()
                for j, part in enumerate(parts):
                    part.append(_values(view.child(j), batch.schema.child(j).format))
        finally:
            statement.close()
        return [
            np.concatenate(part).astype(dtype, copy=False) if part else np.empty(0, dtype)
            for part, dtype in zip(parts, dtypes, strict=True)
        ]

    def close(self) -> None:
        self._connection.close()
        self._database.close()


def open_columnar(engine: Engine) -> ColumnarConnection | None:
    """An ADBC connection to the engine's database, or None where no ADBC driver serves it."""
    database = _database(engine)
    return None if database is None else ColumnarConnection(database)


def _values(child, arrow_format: str) -> np.ndarray:
    dtype = _DTYPES.get(arrow_format)
    if dtype is None or child.null_count:
        raise TypeError(f"column of Arrow type {arrow_format!r} is not numeric and NOT NULL")
    if child.length == 0:
        return np.empty(0, dtype)
    # copied: the batch's memory goes back to the driver when the stream moves on
    data = np.frombuffer(child.buffer(1), dtype)
    return data[child.offset : child.offset + child.length].copy()
