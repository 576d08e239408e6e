"""CSV import speed and on-disk size of readings on SQLite, beside raw sqlite3 in the same run.

Writes a trend-log export (ROWS lines x 20 point columns = 1e6 readings by default, 1-minute
samples, local time stamps), imports it with ``rimewatch.ingest.csv_import`` into a fresh SQLite
file, then inserts the same readings with bare ``sqlite3.executemany`` into an identical table (the
baseline: no parsing, conversion or validation). Reports lines/s, readings/s and bytes on disk per
reading after a WAL checkpoint.

    .venv/bin/python benchmarks/csv_import.py [ROWS]
"""

from __future__ import annotations

import os
import sqlite3
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from rimewatch.ingest.csv_import import import_csv
from rimewatch.site import parse_site
from rimewatch.site_sync import apply_site, csv_targets
from rimewatch.store import connect, find_unit_id, read_unit_frame

ROLES = {
    "suction_pressure": "psig",
    "discharge_pressure": "psig",
    "liquid_pressure": "psig",
    "suction_temp": "degF",
    "discharge_temp": "degF",
    "liquid_temp": "degF",
    "outdoor_air_temp": "degF",
    "return_air_temp": "degF",
    "supply_air_temp": "degF",
    "compressor_current": "A",
}
UNITS = ("rtu-1", "rtu-2")


def site_document() -> dict:
    units = [
        {
            "id": unit,
            "name": unit,
            "kind": "rooftop_unit",
            "refrigerant": "R410A",
            "expansion_device": "txv",
            "nominal_capacity_kW": 35,
            "points": [
                {"role": role, "unit": measure, "csv_column": f"{unit} {role}"}
                for role, measure in ROLES.items()
            ],
        }
        for unit in UNITS
    ]
    return {
        "site": {"name": "Bench", "timezone": "America/Chicago"},
        "csv": {"timestamp_column": "Time", "chunk_rows": 50_000},
        "units": units,
    }


def write_csv(path: Path, rows: int) -> None:
    rng = np.random.default_rng(1)
    times = pd.date_range("2023-01-01", periods=rows, freq="1min")  # local wall time
    frame = pd.DataFrame({"Time": times.strftime("%Y-%m-%d %H:%M:%S")})
    for unit in UNITS:
        for role, measure in ROLES.items():
            centre = {"psig": 150.0, "degF": 70.0, "A": 20.0}[measure]
            values = np.abs(centre + rng.normal(0, 5, rows))  # no negative currents
            frame[f"{unit} {role}"] = np.round(values, 1)
    frame.to_csv(path, index=False)


def file_size(path: Path) -> int:
    return sum(os.path.getsize(p) for p in (path, Path(f"{path}-wal")) if p.exists())


def checkpointed_size(path: Path) -> int:
    with sqlite3.connect(path) as conn:
        conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return file_size(path)


def main(rows: int) -> None:
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        csv = folder / "export.csv"
        write_csv(csv, rows)
        db = folder / "rimewatch.db"
        engine = connect(f"sqlite:///{db}")
        config = parse_site(site_document())
        apply_site(engine, config)
        fmt, columns, _ = csv_targets(engine, config)
        empty_size = checkpointed_size(db)

        start = time.perf_counter()
        result = import_csv(engine, csv, fmt, columns, config.atmospheric_pressure_Pa)
        import_s = time.perf_counter() - start
        readings = result.readings_stored
        assert result.quarantined == 0 and readings == rows * len(columns)
        engine.dispose()
        db_bytes = checkpointed_size(db) - empty_size

        start = time.perf_counter()
        again = import_csv(connect(f"sqlite:///{db}"), csv, fmt, columns, 101325.0)
        replay_s = time.perf_counter() - start
        assert again.readings_stored == 0

        engine = connect(f"sqlite:///{db}")
        unit_id = find_unit_id(engine, "Bench", "rtu-1")
        start = time.perf_counter()
        frame = read_unit_frame(engine, unit_id, "2022-12-31T00:00Z", "2024-01-01T00:00Z")
        frame_s = time.perf_counter() - start
        frame_readings = int(frame.count().sum())
        engine.dispose()

        with sqlite3.connect(db) as conn:
            start = time.perf_counter()
            unit_rows = conn.execute(
                "SELECT p.role, r.ts_ms, r.value FROM readings r JOIN points p "
                "ON p.id = r.point_id WHERE p.unit_id = ?",
                (unit_id,),
            ).fetchall()
            pd.DataFrame(unit_rows, columns=["role", "ts_ms", "value"]).pivot(
                index="ts_ms", columns="role", values="value"
            )
            pivot_s = time.perf_counter() - start
            tuples = conn.execute("SELECT point_id, ts_ms, value FROM readings").fetchall()
        raw = folder / "raw.db"
        conn = sqlite3.connect(raw)
        for pragma in ("journal_mode=WAL", "synchronous=NORMAL"):
            conn.execute(f"PRAGMA {pragma}")
        conn.execute(
            "CREATE TABLE readings (point_id INTEGER NOT NULL, ts_ms BIGINT NOT NULL, "
            "value FLOAT NOT NULL, PRIMARY KEY (point_id, ts_ms)) WITHOUT ROWID"
        )
        tuples.sort(key=lambda t: (t[1], t[0]))  # file order: time-major, as the import writes
        start = time.perf_counter()
        with conn:
            conn.executemany("INSERT INTO readings VALUES (?, ?, ?) ON CONFLICT DO NOTHING", tuples)
        raw_s = time.perf_counter() - start
        conn.close()
        raw_bytes = checkpointed_size(raw)

    print(f"file: {rows} lines x {len(columns)} columns = {readings} readings")
    print(f"{'path':<42}{'lines/s':>12}{'readings/s':>14}")
    print(
        f"{'rimewatch import (parse, SI, validate)':<42}{rows / import_s:>12,.0f}"
        f"{readings / import_s:>14,.0f}"
    )
    print(
        f"{'rimewatch import again (all duplicates)':<42}{rows / replay_s:>12,.0f}"
        f"{readings / replay_s:>14,.0f}"
    )
    print(f"{'baseline: sqlite3 executemany only':<42}{'':>12}{readings / raw_s:>14,.0f}")
    print(
        f"{'read_unit_frame (one unit, wide frame)':<42}{'':>12}{frame_readings / frame_s:>14,.0f}"
    )
    print(f"{'baseline: sqlite3 fetchall + pivot':<42}{'':>12}{frame_readings / pivot_s:>14,.0f}")
    print(
        f"bytes on disk per reading: rimewatch {db_bytes / readings:.1f}, "
        f"baseline table {raw_bytes / readings:.1f}"
    )
    print(
        f"RESULT csv_lines_per_s={rows / import_s:.0f} "
        f"csv_readings_per_s={readings / import_s:.0f} "
        f"reimport_readings_per_s={readings / replay_s:.0f} "
        f"baseline_executemany_readings_per_s={readings / raw_s:.0f} "
        f"import_vs_baseline={raw_s / import_s:.2f} bytes_per_reading={db_bytes / readings:.1f} "
        f"read_unit_frame_readings_per_s={frame_readings / frame_s:.0f} "
        f"baseline_fetch_pivot_readings_per_s={frame_readings / pivot_s:.0f} "
        f"readings={readings}"
    )


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 50_000)
