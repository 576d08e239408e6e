"""Database backends for tests: a SQLite file under tmp_path, and a throw-away PostgreSQL database.

Use with ``pytest_plugins = ["db_backends"]`` in a test module; the ``db_url`` fixture then runs
each test once per backend. PostgreSQL is taken from RIMEWATCH_TEST_PG (a SQLAlchemy URL of a
server's maintenance database), default ``postgresql://postgres@127.0.0.1:5432/postgres``; when
it is unreachable the PostgreSQL variants are skipped with a loud reason.
"""

from __future__ import annotations

import os
import uuid

import pytest
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

PG_ADMIN_URL = os.environ.get("RIMEWATCH_TEST_PG", "postgresql://postgres@127.0.0.1:5432/postgres")


def _postgres_admin():
    engine = create_engine(
        PG_ADMIN_URL, isolation_level="AUTOCOMMIT", connect_args={"connect_timeout": 3}
    )
    try:
        with engine.connect() as conn:
            conn.execute(text("SELECT 1"))
    except Exception as exc:
        engine.dispose()
        pytest.skip(
            f"POSTGRESQL NOT REACHABLE at {make_url(PG_ADMIN_URL).render_as_string()}: the "
            f"PostgreSQL variants of the store tests are SKIPPED ({type(exc).__name__}). "
            "Set RIMEWATCH_TEST_PG to a reachable server's URL to run them."
        )
    return engine


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def db_url(request, tmp_path):
    """A SQLAlchemy URL of an empty database on each backend."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'rimewatch.db'}"
        return
    admin = _postgres_admin()
    name = f"rimewatch_test_{uuid.uuid4().hex[:12]}"
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    try:
        yield make_url(PG_ADMIN_URL).set(database=name).render_as_string(hide_password=False)
    finally:
        with admin.connect() as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()
