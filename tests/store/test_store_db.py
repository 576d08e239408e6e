"""The database layer on real SQLite files and, when reachable, a real PostgreSQL server."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlalchemy import inspect, select, text

from rimewatch.store import (
    QuarantineEntry,
    connect,
    default_url,
    mark_reprocessed,
    pending_quarantine,
    read_unit_frame,
    write_quarantine,
    write_readings,
)
from rimewatch.store.readings import FrameReader
from rimewatch.store.schema import Base, Point, Site, Unit

pytest_plugins = ["db_backends"]

T0_MS = 1_717_243_200_000  # 2024-06-01T12:00:00Z


def _unit_with_points(engine, site_name="Test site", roles=("suction_pressure", "suction_temp")):
    with engine.begin() as conn:
        site_id = conn.execute(
            Site.__table__.insert().values(
                name=site_name, timezone="UTC", elevation_m=0.0, display_units="SI"
            )
        ).inserted_primary_key[0]
        unit_id = conn.execute(
            Unit.__table__.insert().values(
                site_id=site_id,
                key="rtu-1",
                name="RTU 1",
                kind="rooftop_unit",
                refrigerant="R410A",
                description="{}",
                retired=False,
            )
        ).inserted_primary_key[0]
        point_ids = [
            conn.execute(
                Point.__table__.insert().values(
                    unit_id=unit_id, role=role, measurement_unit="Pa", retired=False
                )
            ).inserted_primary_key[0]
            for role in roles
        ]
    return site_id, unit_id, point_ids


def test_migrations_create_the_schema_the_models_describe(db_url):
    engine = connect(db_url)
    tables = set(inspect(engine).get_table_names())
    assert {"sites", "units", "points", "readings", "quarantine", "alembic_version"} <= tables
    with engine.connect() as conn:
        differences = compare_metadata(MigrationContext.configure(conn), Base.metadata)
    assert differences == []
    pk = inspect(engine).get_pk_constraint("readings")
    assert pk["constrained_columns"] == ["point_id", "ts_ms"]
    connect(db_url)  # a second connect finds the schema current and changes nothing
    with engine.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM alembic_version")).scalar() == 1


def test_sqlite_pragmas_on_every_connection_and_readings_without_rowid(tmp_path):
    engine = connect(f"sqlite:///{tmp_path / 'p.db'}")
    for _ in range(2):
        with engine.connect() as conn:
            pragmas = [
                conn.exec_driver_sql(f"PRAGMA {name}").scalar()
                for name in ("journal_mode", "synchronous", "foreign_keys", "busy_timeout")
            ]
            # synchronous NORMAL is 1 in SQLite's numbering (sqlite.org/pragma.html)
            assert pragmas == ["wal", 1, 1, 5000]
        engine.dispose()
        engine = connect(f"sqlite:///{tmp_path / 'p.db'}")
    with engine.connect() as conn:
        ddl = conn.exec_driver_sql("SELECT sql FROM sqlite_master WHERE name = 'readings'").scalar()
    assert "WITHOUT ROWID" in ddl


def test_default_url_from_environment(monkeypatch):
    monkeypatch.delenv("RIMEWATCH_DB", raising=False)
    assert default_url() == "sqlite:///rimewatch.db"
    monkeypatch.setenv("RIMEWATCH_DB", "postgresql://somewhere/plant")
    assert default_url() == "postgresql://somewhere/plant"


def test_writes_are_idempotent(db_url):
    engine = connect(db_url)
    _, _, (p1, p2) = _unit_with_points(engine)
    rows = [(p, T0_MS + i * 60_000, 300_000.0 + i) for p in (p1, p2) for i in range(500)]
    assert write_readings(engine, rows) == 1000
    assert write_readings(engine, rows) == 0
    changed = [(p1, T0_MS, -1.0), (p1, T0_MS - 60_000, 1.5)]  # one clash, one new
    with engine.begin() as conn:
        assert write_readings(conn, changed) == 1
    with engine.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM readings")).scalar() == 1001
        kept = conn.execute(
            text("SELECT value FROM readings WHERE point_id = :p AND ts_ms = :t"),
            {"p": p1, "t": T0_MS},
        ).scalar()
    assert kept == 300_000.0  # the first stored value stays
    assert write_readings(engine, []) == 0


def test_connection_writes_wait_for_the_callers_commit(db_url):
    engine = connect(db_url)
    _, _, (p1, _) = _unit_with_points(engine)
    with engine.connect() as conn:
        write_readings(conn, [(p1, T0_MS, 1.0)])
        conn.rollback()
    with engine.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM readings")).scalar() == 0


def test_read_unit_frame_is_wide_utc_and_half_open(db_url):
    engine = connect(db_url)
    _, unit_id, (p_suc, t_suc) = _unit_with_points(engine)
    write_readings(engine, [(p_suc, T0_MS + i * 60_000, 1e5 + i) for i in range(10)])
    write_readings(engine, [(t_suc, T0_MS + i * 120_000, 280.0 + i) for i in range(5)])
    start = pd.Timestamp(T0_MS, unit="ms", tz="UTC")
    frame = read_unit_frame(engine, unit_id, start, start + pd.Timedelta(minutes=9))
    assert list(frame.columns) == ["suction_pressure", "suction_temp"]
    assert str(frame.index.tz) == "UTC"
    assert len(frame) == 9  # [start, start + 9 min): minutes 0..8
    assert frame.index[0] == start
    assert frame["suction_pressure"].iloc[3] == 1e5 + 3
    assert math.isnan(frame["suction_temp"].iloc[1])  # no temperature sample at minute 1
    assert frame["suction_temp"].iloc[2] == 281.0
    empty = read_unit_frame(engine, unit_id, start - pd.Timedelta(days=2), start)
    assert empty.empty
    with pytest.raises(ValueError, match="time zone"):
        read_unit_frame(engine, unit_id, "2024-06-01 12:00", "2024-06-02 12:00")


def test_read_unit_frame_points_at_the_same_instants_written_out_of_order(db_url):
    engine = connect(db_url)
    _, unit_id, (p_suc, t_suc) = _unit_with_points(engine)
    minutes = [4, 0, 3, 1, 2]
    write_readings(engine, [(p_suc, T0_MS + m * 60_000, 1e5 + m) for m in minutes])
    write_readings(engine, [(t_suc, T0_MS + m * 60_000, 280.0 + m) for m in reversed(minutes)])
    start = pd.Timestamp(T0_MS, unit="ms", tz="UTC")
    frame = read_unit_frame(engine, unit_id, start, start + pd.Timedelta(hours=1))
    assert frame.index.is_monotonic_increasing and len(frame) == 5
    assert frame["suction_pressure"].tolist() == [1e5 + m for m in range(5)]
    assert frame["suction_temp"].tolist() == [280.0 + m for m in range(5)]


def test_arrow_read_matches_the_dbapi_read_over_many_batches_and_gaps(db_url):
    """The ADBC path (batches of ~1,000 rows) and the driver's cursor give the same frame."""
    engine = connect(db_url)
    _, unit_id, (p_suc, t_suc) = _unit_with_points(engine)
    rng = np.random.default_rng(7)
    minutes = np.arange(5000)
    kept_p = minutes[rng.random(5000) > 0.1]  # each point misses different minutes
    kept_t = minutes[rng.random(5000) > 0.1]
    write_readings(engine, [(p_suc, T0_MS + int(m) * 60_000, 1e5 + m / 7) for m in kept_p])
    write_readings(engine, [(t_suc, T0_MS + int(m) * 60_000, 250.0 + m / 3) for m in kept_t])
    start = pd.Timestamp(T0_MS, unit="ms", tz="UTC") + pd.Timedelta(minutes=10)
    end = start + pd.Timedelta(days=3)
    with FrameReader(engine) as reader:
        assert reader.columnar  # both backends have an ADBC driver
        arrow = reader.read(unit_id, start, end)
    with engine.connect() as conn:
        dbapi = read_unit_frame(conn, unit_id, start, end)
    pd.testing.assert_frame_equal(arrow, dbapi)
    union = np.union1d(kept_p, kept_t)
    assert len(arrow) == ((union >= 10) & (union < 10 + 3 * 1440)).sum()
    assert arrow["suction_pressure"].notna().sum() == ((kept_p >= 10) & (kept_p < 4330)).sum()


def test_sql_significant_characters_are_plain_data(db_url):
    engine = connect(db_url)
    tricky = 'Bob\'s "Deli"; DROP TABLE readings; --'
    _, unit_id, (p1,) = _unit_with_points(engine, site_name=tricky, roles=("box_temp",))
    with engine.begin() as conn:
        conn.execute(
            Point.__table__.update()
            .where(Point.id == p1)
            .values(mqtt_topic="site/'; DELETE FROM points; --/box", csv_column='a";b')
        )
    write_readings(engine, [(p1, T0_MS, 270.0)])
    entry = QuarantineEntry("mqtt", "x/'; DROP TABLE quarantine; --", None, b"'; --", "bad")
    assert write_quarantine(engine, [entry]) == 1
    with engine.connect() as conn:
        assert conn.execute(select(Site.name)).scalar() == tricky
        assert conn.execute(select(Point.mqtt_topic)).scalar().startswith("site/'; DELETE")
        assert conn.execute(text("SELECT count(*) FROM readings")).scalar() == 1
    assert pending_quarantine(engine)[0].origin == "x/'; DROP TABLE quarantine; --"
    assert read_unit_frame(engine, unit_id, "2024-06-01T00:00Z", "2024-06-02T00:00Z").shape == (
        1,
        1,
    )


def test_quarantine_keeps_payload_and_marks_reprocessed(db_url):
    engine = connect(db_url)
    raw = bytes(range(256))  # not UTF-8: kept byte for byte
    entries = [
        QuarantineEntry("mqtt", "t/1", None, raw, "not UTF-8", received_ms=T0_MS),
        QuarantineEntry("csv", "/data/x.csv", 17, "12;abc", "not a number"),
        QuarantineEntry("mqtt", "t/2", None, b"x" * 70_000, "oversize"),
    ]
    assert write_quarantine(engine, entries) == 3
    stored = pending_quarantine(engine)
    assert bytes(stored[0].payload) == raw and stored[0].received_ms == T0_MS
    assert stored[1].line == 17 and stored[1].source == "csv"
    assert len(bytes(stored[2].payload)) == 65536 and "cut to 65536" in stored[2].reason
    assert [e.id for e in pending_quarantine(engine, source="csv")] == [stored[1].id]
    with engine.begin() as conn:
        mark_reprocessed(conn, [stored[0].id])
    assert [e.id for e in pending_quarantine(engine)] == [stored[1].id, stored[2].id]
    everything = pending_quarantine(engine, include_reprocessed=True)
    assert everything[0].reprocessed and everything[0].reprocessed_ms is not None


def test_readings_need_an_existing_point(db_url):
    engine = connect(db_url)
    with pytest.raises(Exception, match=r"(?i)foreign key"):
        write_readings(engine, [(999, T0_MS, 1.0)])


def test_a_failed_read_in_the_reader_process_is_a_clear_error_and_it_serves_on(tmp_path):
    from rimewatch.store.columnar import ReaderProcess

    engine = connect(f"sqlite:///{tmp_path / 'r.db'}")
    _, _, (p_suc, _) = _unit_with_points(engine)
    write_readings(engine, [(p_suc, T0_MS, 1e5)])
    reader = ReaderProcess(tmp_path / "r.db")
    try:
        with pytest.raises(RuntimeError, match="no such table"):
            reader.fetch_many(["SELECT ts_ms, value FROM no_table"], (np.int64, np.float64))
        [(times, values)] = reader.fetch_many(
            ["SELECT ts_ms, value FROM readings"], (np.int64, np.float64)
        )
        assert times.tolist() == [T0_MS] and values.tolist() == [1e5]
    finally:
        reader.close()


def _read_in_pool_worker(args):
    url, unit_id, start, end = args
    with FrameReader(connect(url)) as reader:
        return reader.columnar, reader.read(unit_id, start, end)


def test_a_daemonic_pool_worker_reads_through_the_dbapi_driver(tmp_path):
    """Pool workers may not start the ADBC reader process: they read through sqlite3."""
    import multiprocessing

    url = f"sqlite:///{tmp_path / 'w.db'}"
    engine = connect(url)
    _, unit_id, (p_suc, _) = _unit_with_points(engine)
    write_readings(engine, [(p_suc, T0_MS + i * 60_000, 1e5 + i) for i in range(5)])
    start = pd.Timestamp(T0_MS, unit="ms", tz="UTC")
    end = start + pd.Timedelta(hours=1)
    with multiprocessing.get_context("spawn").Pool(1) as pool:
        columnar, frame = pool.map(_read_in_pool_worker, [(url, unit_id, start, end)])[0]
    assert not columnar
    pd.testing.assert_frame_equal(frame, read_unit_frame(engine, unit_id, start, end))
