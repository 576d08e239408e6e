"""CSV trend-log import on real databases: conversion, quarantine, idempotence, DST, cut files.

External references used below:
- 1 psi = 6.894757e3 Pa; T[K] = (T[degF] - 32) * 5/9 + 273.15 (NIST SP 811, Appendix B).
- Sea-level standard atmosphere 101325 Pa (ISO 2533), used for gauge pressures at elevation 0.
- EU summer time ends on the last Sunday of October and starts on the last Sunday of March, both at
  01:00 UTC (Directive 2000/84/EC); Europe/Vienna is UTC+2 in summer, UTC+1 in winter.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import text

from rimewatch.ingest.csv_import import CsvFormat, CsvImportError, import_csv, reprocess_csv
from rimewatch.site import parse_site
from rimewatch.site_sync import apply_site, csv_targets
from rimewatch.store import connect, pending_quarantine

pytest_plugins = ["db_backends"]

PSI_PA = 6.894757e3


def site_document(temp_unit="degF") -> dict:
    return {
        "site": {"name": "CSV test", "timezone": "Europe/Vienna", "elevation_m": 0},
        "csv": {
            "timestamp_column": "Time",
            "timestamp_format": "%d.%m.%Y %H:%M",
            "delimiter": ";",
            "decimal": ",",
        },
        "units": [
            {
                "id": "rtu-1",
                "name": "RTU",
                "kind": "rooftop_unit",
                "refrigerant": "R410A",
                "expansion_device": "txv",
                "nominal_capacity_kW": 35,
                "points": [
                    {"role": "suction_pressure", "unit": "psig", "csv_column": "Suction 'psig'"},
                    {"role": "discharge_temp", "unit": temp_unit, "csv_column": "Disch; T"},
                    {"role": "compressor_status", "unit": "on/off", "csv_column": "Comp"},
                ],
            }
        ],
    }


def prepared(db_url, document=None):
    engine = connect(db_url)
    config = parse_site(document or site_document())
    apply_site(engine, config)
    fmt, columns, site_id = csv_targets(engine, config)
    return engine, config, fmt, columns, site_id


def run_import(engine, path, fmt, columns, site_id=None):
    return import_csv(engine, path, fmt, columns, 101325.0, site_id=site_id)


def stored(engine) -> pd.DataFrame:
    with engine.connect() as conn:
        rows = conn.execute(
            text(
                "SELECT p.role, r.ts_ms, r.value FROM readings r JOIN points p "
                "ON p.id = r.point_id ORDER BY p.role, r.ts_ms"
            )
        ).all()
    return pd.DataFrame(rows, columns=["role", "ts_ms", "value"])


HEADER = "Time;Suction 'psig';\"Disch; T\";Comp;Ignored\n"
GOOD_AND_BAD = (
    HEADER
    + "01.07.2024 12:00;118,5;180;on;x\n"  # line 2
    + "01.07.2024 12:15;abc;181;off;x\n"  # line 3: bad pressure cell
    + "\n"  # line 4: blank
    + "01.07.2024 12:30;119;NaN;on;x\n"  # line 5: NaN temperature
    + "32.07.2024 12:45;119;182;on;x\n"  # line 6: impossible date
    + "01.07.2024 13:00;119;182;on;x;extra\n"  # line 7: too many fields
    + "01.07.2024 13:15;119;;maybe;x\n"  # line 8: empty temp (no sample), bad status
    + "01.07.2024 13:30;-20;182;on;x\n"  # line 9: -20 psig is below vacuum
)


def test_import_converts_to_si_and_quarantines_with_line_numbers(db_url, tmp_path):
    engine, _, fmt, columns, site_id = prepared(db_url)
    path = tmp_path / "trend.csv"
    path.write_text(GOOD_AND_BAD)
    result = run_import(engine, path, dataclasses.replace(fmt, chunk_rows=3), columns, site_id)

    frame = stored(engine)
    pressure = frame[frame.role == "suction_pressure"]
    t0 = pd.Timestamp("2024-07-01 12:00", tz="Europe/Vienna").value // 1_000_000
    assert pressure.ts_ms.iloc[0] == t0  # 12:00 CEST = 10:00 UTC
    assert pressure.value.iloc[0] == pytest.approx(118.5 * PSI_PA + 101325.0, rel=1e-6)
    temps = frame[frame.role == "discharge_temp"]
    assert temps.value.iloc[0] == pytest.approx((180 - 32) * 5 / 9 + 273.15, abs=1e-9)
    assert frame[frame.role == "compressor_status"].value.tolist() == [1.0, 0.0, 1.0, 1.0]
    # stored: line 2 (3 values), 3 (2), 5 (2), 8 (1), 9 (2)
    assert len(frame) == 10 and result.readings_stored == 10
    assert result.cells_empty == 1

    problems = {(e.line, e.reason.split(":")[0]) for e in pending_quarantine(engine)}
    assert problems == {
        (3, "column \"Suction 'psig'\""),
        (5, "column 'Disch; T'"),
        (6, "timestamp '32.07.2024 12"),
        (7, "line has more fields than the header"),
        (8, "column 'Comp'"),
        (9, "column \"Suction 'psig'\""),
    }
    entry = next(e for e in pending_quarantine(engine) if e.line == 3)
    assert (
        bytes(entry.payload).decode() == '{"Time": "01.07.2024 12:15", "Suction \'psig\'": "abc"}'
    )
    assert result.quarantined == 6 and result.columns_ignored == ["Ignored"]

    again = run_import(engine, path, fmt, columns, site_id)  # different chunking, same file
    assert again.readings_stored == 0 and again.readings_already_stored == 10
    assert again.quarantined == 0
    assert len(stored(engine)) == 10 and len(pending_quarantine(engine)) == 6


def test_dst_fall_back_and_spring_forward(db_url, tmp_path):
    engine, _, fmt, columns, _ = prepared(db_url)
    fmt = dataclasses.replace(fmt, chunk_rows=3)  # the repeated hour spans chunks
    local = [
        "27.10.2024 01:45",
        "27.10.2024 02:00",
        "27.10.2024 02:15",
        "27.10.2024 02:30",
        "27.10.2024 02:45",
        "27.10.2024 02:00",
        "27.10.2024 02:15",
        "27.10.2024 02:30",
        "27.10.2024 02:45",
        "27.10.2024 03:00",
        "31.03.2024 02:30",
    ]
    path = tmp_path / "dst.csv"
    path.write_text(HEADER + "".join(f"{t};100;150;on;x\n" for t in local))
    run_import(engine, path, fmt, columns)
    ts = stored(engine).query("role == 'suction_pressure'").ts_ms.to_numpy()
    # 01:45 CEST = 23:45 UTC on the 26th; then every 15 minutes through the repeated hour.
    first = pd.Timestamp("2024-10-26 23:45", tz="UTC").value // 1_000_000
    np.testing.assert_array_equal(ts, first + 900_000 * np.arange(10))
    (gap,) = pending_quarantine(engine)
    assert gap.line == 12 and "does not exist in Europe/Vienna" in gap.reason


def test_iso_timestamps_with_offsets_and_without(db_url, tmp_path):
    engine, _, fmt, columns, _ = prepared(db_url)
    fmt = dataclasses.replace(fmt, timestamp_format=None)
    path = tmp_path / "iso.csv"
    path.write_text(
        HEADER
        + "2024-07-01T10:00:00Z;100;150;on;x\n"
        + "2024-07-01T12:15:00+02:00;100;150;on;x\n"
        + "2024-07-01 12:30:00;100;150;on;x\n"  # no offset: site zone, CEST
    )
    run_import(engine, path, fmt, columns)
    ts = stored(engine).query("role == 'suction_pressure'").ts_ms.to_numpy()
    first = pd.Timestamp("2024-07-01 10:00", tz="UTC").value // 1_000_000
    np.testing.assert_array_equal(ts, first + 900_000 * np.arange(3))


@pytest.mark.parametrize("cut", ["01.07.2024 13", "01.07.2024 13:00;11", "01.07.2024 13:00;119;18"])
def test_cut_off_last_line_is_quarantined_not_stored(db_url, tmp_path, cut):
    engine, _, fmt, columns, _ = prepared(db_url)
    path = tmp_path / "cut.csv"
    path.write_text(HEADER + "01.07.2024 12:00;118,5;180;on;x\n" + cut)
    result = run_import(engine, path, fmt, columns)
    assert result.readings_stored == 3
    (entry,) = pending_quarantine(engine)
    assert entry.line == 3 and "cut off" in entry.reason
    assert bytes(entry.payload).decode() == cut


def test_wrong_timestamp_format_stops_before_storing(db_url, tmp_path):
    engine, _, fmt, columns, _ = prepared(db_url)
    path = tmp_path / "us.csv"
    path.write_text(HEADER + "07/01/2024 12:00;100;150;on;x\n")
    with pytest.raises(CsvImportError, match=r"fix csv\.timestamp_format"):
        run_import(engine, path, fmt, columns)
    assert stored(engine).empty and pending_quarantine(engine) == []
    with pytest.raises(CsvImportError, match="no timestamp column 'Time'"):
        run_import(engine, path, dataclasses.replace(fmt, delimiter=","), columns)


def test_reprocess_after_unit_fix(db_url, tmp_path):
    # Discharge temperatures written in degF but configured as degC: 250 degC + 273.15 exceeds the
    # plausible discharge range, so those cells go to quarantine.
    engine, _, fmt, columns, site_id = prepared(db_url, site_document(temp_unit="degC"))
    path = tmp_path / "f.csv"
    path.write_text(HEADER + "01.07.2024 12:00;100;250;on;x\n01.07.2024 12:15;100;abc;on;x\n")
    run_import(engine, path, fmt, columns, site_id)
    assert len(pending_quarantine(engine)) == 2

    engine, _, fmt, columns, site_id = prepared(db_url, site_document(temp_unit="degF"))
    count, done = reprocess_csv(engine, pending_quarantine(engine), fmt, columns, 101325.0)
    assert count == 1 and len(done) == 1
    (left,) = pending_quarantine(engine)
    assert left.line == 3  # 'abc' still is not a number
    temp = stored(engine).query("role == 'discharge_temp'").value.iloc[0]
    assert temp == pytest.approx((250 - 32) * 5 / 9 + 273.15, abs=1e-9)


def test_plain_csv_defaults(db_url, tmp_path):
    engine, _, _, columns, _ = prepared(db_url)
    fmt = CsvFormat(timestamp_column="Time", timezone="UTC")
    path = tmp_path / "plain.csv"
    path.write_text("Time,Comp\n2024-01-01 00:00,off\n2024-01-01 00:01,on\n")
    result = run_import(engine, path, fmt, {"Comp": columns["Comp"]})
    assert result.readings_stored == 2 and result.columns_missing == []
