"""rimewatch.store: the database (SQLAlchemy 2 + Alembic; SQLite default, PostgreSQL by URL).

Times are UTC epoch milliseconds (``ts_ms``), values SI. See docs/store.md.
"""

from rimewatch.store.catalog import PointInfo, active_points, find_unit_id
from rimewatch.store.db import DatabaseURLError, connect, default_url, migrate
from rimewatch.store.quarantine import (
    QuarantineEntry,
    mark_reprocessed,
    now_ms,
    pending_quarantine,
    write_quarantine,
)
from rimewatch.store.readings import read_unit_frame, to_epoch_ms, write_readings

__all__ = [
    "DatabaseURLError",
    "PointInfo",
    "QuarantineEntry",
    "active_points",
    "connect",
    "default_url",
    "find_unit_id",
    "mark_reprocessed",
    "migrate",
    "now_ms",
    "pending_quarantine",
    "read_unit_frame",
    "to_epoch_ms",
    "write_quarantine",
    "write_readings",
]
