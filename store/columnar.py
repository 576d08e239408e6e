"""Readings fetched as numpy columns through an ADBC driver (Apache Arrow Database Connectivity).

The DB-API drivers (sqlite3, psycopg) build a Python tuple, int and float for every row; at fleet
scale (tens of millions of readings) that costs more than the analysis. The ADBC drivers for
SQLite and PostgreSQL step through the rows in C and hand back Arrow buffers, which become numpy
arrays without a Python object per reading.

SQLite must not be linked twice into a process that opens the same database file: each copy keeps
its own record of the process's POSIX locks, and a file closed by one copy silently drops the
locks the other holds (https://www.sqlite.org/howtocorrupt.html, section 2.2.1). Python's sqlite3
module and the ADBC driver each carry their own SQLite, so ADBC reads of a SQLite file run in a
reader process of their own (:class:`ReaderProcess`); PostgreSQL is read in-process.

Engines no ADBC driver serves (an in-memory SQLite database, other dialects), and SQLite read from
a daemonic pool worker (which may not start the reader process), give ``None`` from
:func:`open_columnar`; the caller keeps the DB-API path.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import threading
from pathlib import Path

import adbc_driver_manager
import nanoarrow
import numpy as np
from sqlalchemy import Engine

#: Arrow format string of a column -> numpy dtype
_DTYPES = {"l": np.int64, "i": np.int32, "g": np.float64}  # PostgreSQL ids are int4


class ColumnarConnection:
    """One in-process ADBC connection."""

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

    def fetch_many(self, queries: list[str], dtypes: tuple[type, ...]) -> list[list[np.ndarray]]:
        return [self.fetch(sql, dtypes) for sql in queries]

    def close(self) -> None:
        self._connection.close()
        self._database.close()


class ReaderProcess:
    """ADBC reads of a SQLite file, done by a child process (see the module docstring).

    The child is forked where that is safe (POSIX, this process running one thread), so it starts
    at once with the modules already loaded; else it is spawned.
    """

    def __init__(self, path: Path) -> None:
        fork = "fork" in multiprocessing.get_all_start_methods() and threading.active_count() == 1
        context = multiprocessing.get_context("fork" if fork else "spawn")
        self._pipe, child_end = context.Pipe()
        self._process = context.Process(
            target=_serve_sqlite, args=(str(path), child_end), daemon=True
        )
        self._process.start()
        child_end.close()

    def fetch_many(self, queries: list[str], dtypes: tuple[type, ...]) -> list[list[np.ndarray]]:
        """:meth:`ColumnarConnection.fetch` of each query, in the reader process."""
        self._pipe.send((queries, dtypes))
        try:
            status, payload = self._pipe.recv()
        except EOFError:
            raise RuntimeError("the ADBC reader process ended unexpectedly") from None
        if status != "ok":
            raise RuntimeError(f"reading through ADBC failed: {payload}")
        return payload

    def close(self) -> None:
        with contextlib.suppress(OSError):  # the reader may be gone already
            self._pipe.send(None)
        self._process.join(timeout=5)
        if self._process.is_alive():
            self._process.kill()
        self._pipe.close()


def _serve_sqlite(path: str, pipe) -> None:
    import adbc_driver_sqlite

    connection = ColumnarConnection(adbc_driver_sqlite.connect(Path(path).as_uri()))
    try:
        while (request := pipe.recv()) is not None:
            queries, dtypes = request
            try:
                pipe.send(("ok", connection.fetch_many(queries, dtypes)))
            except Exception as exc:  # the parent raises it; this process serves on
                pipe.send(("error", f"{type(exc).__name__}: {exc}"))
    except EOFError:  # the parent went away
        pass
    finally:
        connection.close()


def open_columnar(engine: Engine) -> ColumnarConnection | ReaderProcess | None:
    """A columnar reader of the engine's database, or None where no ADBC driver serves it."""
    url = engine.url
    backend = url.get_backend_name()
    if backend == "sqlite":
        name = url.database
        if not name or name == ":memory:" or name.startswith("file:"):
            return None
        if multiprocessing.current_process().daemon:  # a pool worker may not start a process
            return None
        return ReaderProcess(Path(name).resolve())
    if backend == "postgresql":
        import adbc_driver_postgresql

        libpq_url = url.set(drivername="postgresql").render_as_string(hide_password=False)
        return ColumnarConnection(adbc_driver_postgresql.connect(libpq_url))
    return None


def _values(child, arrow_format: str) -> np.ndarray:
    dtype = _DTYPES.get(arrow_format)
    if dtype is None or child.null_count:
        raise TypeError(f"column of Arrow type {arrow_format!r} is not numeric and NOT NULL")
    if child.length == 0:
        return np.empty(0, dtype)
    # copied: the batch's memory goes back to the driver when the stream moves on
    data = np.frombuffer(child.buffer(1), dtype)
    return data[child.offset : child.offset + child.length].copy()
