"""Engine creation: one place that knows the database URL, the SQLite pragmas and the migrations.

The database is named by a SQLAlchemy URL: ``--db`` on the command line, else the environment
variable ``RIMEWATCH_DB``, else the SQLite file ``./rimewatch.db``. ``postgresql://...`` URLs use
psycopg 3. Every SQLite connection gets WAL journaling, ``synchronous=NORMAL`` (a power cut can
lose the last commits but never corrupts), enforced foreign keys and a 5 s busy timeout so a second
writer waits instead of failing at once.
"""

from __future__ import annotations

import os
from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Engine, create_engine, event
from sqlalchemy.engine import make_url
from sqlalchemy.exc import ArgumentError

DEFAULT_URL = "sqlite:///rimewatch.db"
ENV_VARIABLE = "RIMEWATCH_DB"
MIGRATIONS_DIR = Path(__file__).with_name("migrations")
SQLITE_PRAGMAS = ("journal_mode=WAL", "synchronous=NORMAL", "foreign_keys=ON", "busy_timeout=5000")


class DatabaseURLError(ValueError):
    """The database URL cannot be understood."""


def default_url() -> str:
    """The URL used when none is given: ``$RIMEWATCH_DB`` or ``sqlite:///rimewatch.db``."""
    return os.environ.get(ENV_VARIABLE) or DEFAULT_URL


def _set_sqlite_pragmas(dbapi_connection, _record) -> None:
    cursor = dbapi_connection.cursor()
    for pragma in SQLITE_PRAGMAS:
        cursor.execute(f"PRAGMA {pragma}")
    cursor.close()


def _alembic_config() -> Config:
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS_DIR))
    return config


def migrate(engine: Engine) -> None:
    """Bring the schema to the newest migration (no-op when it is already there)."""
    config = _alembic_config()
    head = ScriptDirectory.from_config(config).get_current_head()
    with engine.begin() as conn:
        if MigrationContext.configure(conn).get_current_revision() == head:
            return
        config.attributes["connection"] = conn
        command.upgrade(config, "head")


def connect(url: str | None = None, *, run_migrations: bool = True) -> Engine:
    """Create the engine for ``url`` (default: :func:`default_url`) and migrate its schema.

    Raises
    ------
    DatabaseURLError
        When the URL is malformed or names a driver that is not installed.
    """
    url = url or default_url()
    try:
        parsed = make_url(url)
        engine = create_engine(parsed)
    except (ArgumentError, ImportError, ValueError) as exc:
        raise DatabaseURLError(f"database URL {url!r}: {exc}") from exc
    if parsed.get_backend_name() == "sqlite":
        database = parsed.database
        if database and database != ":memory:" and not database.startswith("file:"):
            Path(database).expanduser().parent.mkdir(parents=True, exist_ok=True)
        event.listen(engine, "connect", _set_sqlite_pragmas)
    if run_migrations:
        migrate(engine)
    return engine
