"""`rimewatch baseline / analyze / faults` on a real SQLite file holding a simulated unit."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import yaml
from click.testing import CliRunner
from sqlalchemy import func, select

from rimewatch.cli import main

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "detect"))
from simulated import END, ONSET, START, readings, sized

UNITS = {  # role -> unit string of the point (values are written in SI)
    "suction_pressure": "Pa",
    "discharge_pressure": "Pa",
    "liquid_pressure": "Pa",
    "suction_temp": "K",
    "discharge_temp": "K",
    "liquid_temp": "K",
    "outdoor_air_temp": "K",
    "condenser_leaving_air_temp": "K",
    "return_air_temp": "K",
    "return_air_humidity": "%",
    "supply_air_temp": "K",
    "compressor_power": "W",
    "compressor_current": "A",
    "compressor_status": "on/off",
}


def _site_file(tmp_path: Path, unit_ids=("rtu-3",)) -> Path:
    spec, unit = sized("rooftop_unit")
    site = {
        "site": {"name": "Quayside Cold Store", "timezone": "UTC", "elevation_m": 0},
        "units": [
            {
                "id": unit_id,
                "name": "Dispatch hall rooftop unit",
                "kind": "rooftop_unit",
                "refrigerant": spec.refrigerant,
                "expansion_device": spec.expansion_device,
                "nominal_capacity_kW": spec.nominal_capacity_kW,
                "superheat_target_K": spec.design_superheat_K,
                "subcooling_target_K": spec.design_subcooling_K,
                "condenser_airflow_m3_s": spec.condenser_airflow_m3_s,
                "evaporator_airflow_m3_s": spec.evaporator_airflow_m3_s,
                "compressor_map": unit.compressor_map.to_dict(),
                "points": [
                    {"role": r, "unit": u, "mqtt_topic": f"quayside/{unit_id}/{r}"}
                    for r, u in UNITS.items()
                ],
            }
            for unit_id in unit_ids
        ],
    }
    path = tmp_path / "site.yaml"
    path.write_text(yaml.safe_dump(site, sort_keys=False))
    return path


def _store(db_url: str, frame: pd.DataFrame, unit_id: str = "rtu-3") -> None:
    from rimewatch.store import active_points, connect, write_readings

    engine = connect(db_url)
    ids = {p.role: p.id for p in active_points(engine) if p.unit_key == unit_id}
    ts_ms = (frame.index.as_unit("ms").asi8).astype(np.int64)
    rows = []
    for role, point_id in ids.items():
        values = frame[role].to_numpy()
        keep = np.isfinite(values) & (np.abs(values) < 1e8)  # what ingest would store
        rows += list(
            zip(
                [point_id] * int(keep.sum()),
                ts_ms[keep].tolist(),
                values[keep].tolist(),
                strict=True,
            )
        )
    write_readings(engine, rows)


@pytest.fixture(scope="module")
def database(tmp_path_factory):
    tmp_path = tmp_path_factory.mktemp("detect")
    db_url = f"sqlite:///{tmp_path / 'rw.db'}"
    runner = CliRunner()
    result = runner.invoke(main, ["apply", str(_site_file(tmp_path)), "--db", db_url])
    assert result.exit_code == 0, result.output
    _store(db_url, readings("rooftop_unit", (("condenser_fouling", 0.4),)))
    return db_url


def _run(*args):
    result = CliRunner().invoke(main, [*args])
    return result


def _iso(moment) -> str:
    return pd.Timestamp(moment).isoformat()


def test_baseline_analyze_faults_and_rerun_changes_nothing(database):
    from rimewatch.store import connect
    from rimewatch.store.events import EventHistory, EventRecord

    result = _run("baseline", "rtu-3", "--from", _iso(START), "--to", _iso(ONSET), "--db", database)
    assert result.exit_code == 0, result.output
    assert "t_cond" in result.output and "outdoor_air_temp" in result.output

    args = ("analyze", "--since", _iso(ONSET), "--until", _iso(END), "--db", database)
    first = _run(*args)
    assert first.exit_code == 0, first.output
    assert "condenser_fouling" in first.output
    engine = connect(database)

    def snapshot():
        with engine.connect() as conn:
            events = conn.execute(select(EventRecord.__table__).order_by(EventRecord.id)).all()
            history = conn.execute(select(func.count()).select_from(EventHistory)).scalar()
        return [tuple(row) for row in events], history

    before = snapshot()
    second = _run(*args)
    assert second.exit_code == 0, second.output
    assert "0 new, 0 updated" in second.output
    assert snapshot() == before
    # a later, overlapping window extends the same event instead of adding one
    third = _run(
        "analyze",
        "--since",
        _iso(ONSET + pd.Timedelta("12h")),
        "--until",
        _iso(END),
        "--db",
        database,
    )
    assert third.exit_code == 0, third.output
    assert len(snapshot()[0]) == len(before[0])

    listed = _run("faults", "--format", "json", "--db", database)
    assert listed.exit_code == 0, listed.output
    records = json.loads(listed.output)
    fouling = [r for r in records if r["code"] == "condenser_fouling"]
    assert len(fouling) == 1
    record = fouling[0]
    assert list(record) == [
        "id", "site", "unit", "code", "detail", "start", "end", "severity", "severity_score",
        "confidence", "impact", "acknowledged", "suppressed", "evidence",
    ]  # fmt: skip
    assert record["unit"] == "rtu-3" and record["end"] is None
    assert record["severity"] in ("mild", "moderate", "severe")
    assert record["impact"]["extra_power_pct"] > 0

    csv_out = _run("faults", "--format", "csv", "--db", database)
    assert csv_out.output.splitlines()[0].startswith("id,site,unit,code,detail,start,end,severity")

    event_id = str(record["id"])
    assert _run("faults", "ack", event_id, "--by", "Dana Okafor", "--db", database).exit_code == 0
    assert (
        _run(
            "faults", "note", event_id, "coil washed", "--by", "Dana Okafor", "--db", database
        ).exit_code
        == 0
    )
    acked = json.loads(_run("faults", "--format", "json", "--db", database).output)
    assert next(r for r in acked if r["id"] == record["id"])["acknowledged"] is True

    missing = _run("faults", "ack", "9999", "--by", "x", "--db", database)
    assert missing.exit_code != 0 and "no event with id 9999" in missing.output


def test_maintenance_suppresses_open_events(database):
    from rimewatch.store import connect
    from rimewatch.store.events import list_events

    result = _run(
        "faults", "maintenance", "rtu-3", "--on", "--note", "coil cleaning", "--db", database
    )
    assert result.exit_code == 0, result.output
    shown = json.loads(_run("faults", "--open", "--format", "json", "--db", database).output)
    assert shown == []
    everything = list_events(connect(database), include_suppressed=True, open_only=True)
    assert everything and all(e["suppressed"] for e in everything)
    assert _run("faults", "maintenance", "rtu-3", "--off", "--db", database).exit_code == 0


def test_bad_input_is_one_clear_line(database):
    result = _run("analyze", "--since", "yesterday-ish", "--db", database)
    assert result.exit_code != 0 and "is not a date or time" in result.output
    result = _run(
        "baseline", "no-such-unit", "--from", "2026-07-01", "--to", "2026-07-02", "--db", database
    )
    assert result.exit_code != 0 and "no unit 'no-such-unit'" in result.output
    result = _run(
        "baseline", "rtu-3", "--from", "2026-06-01", "--to", "2026-06-02", "--db", database
    )
    assert result.exit_code != 0 and "no readings" in result.output
    assert "Traceback" not in result.output


def test_analysis_shared_over_worker_processes_writes_what_one_process_writes(tmp_path):
    """Three units (two fouled condensers, one fault-free), analysed serially and by 2 workers."""
    from rimewatch.store import connect
    from rimewatch.store.events import EventHistory, EventRecord

    unit_ids = ("rtu-1", "rtu-2", "rtu-3")
    fouled = readings("rooftop_unit", (("condenser_fouling", 0.4),))
    clean = readings("rooftop_unit")
    snapshots = {}
    for workers in ("1", "2"):
        db_url = f"sqlite:///{tmp_path / f'fleet-{workers}.db'}"
        folder = tmp_path / workers
        folder.mkdir()
        assert _run("apply", str(_site_file(folder, unit_ids)), "--db", db_url).exit_code == 0
        for unit_id, frame in zip(unit_ids, (fouled, clean, fouled), strict=True):
            _store(db_url, frame, unit_id)
        for unit_id in unit_ids:
            fitted = _run("baseline", unit_id, "--from", _iso(START), "--to", _iso(ONSET),
                          "--db", db_url)  # fmt: skip
            assert fitted.exit_code == 0, fitted.output
        result = _run("analyze", "--since", _iso(ONSET), "--until", _iso(END),
                      "--workers", workers, "--db", db_url)  # fmt: skip
        assert result.exit_code == 0, result.output
        # units reported in site order whatever worker analysed them
        order = [line.split(":")[0] for line in result.output.splitlines() if "steady of" in line]
        assert order == [f"Quayside Cold Store/{u}" for u in unit_ids]
        with connect(db_url).connect() as conn:
            events = conn.execute(
                select(EventRecord.__table__).order_by(EventRecord.unit_id, EventRecord.code)
            ).all()
            history = conn.execute(select(func.count()).select_from(EventHistory)).scalar()
        snapshots[workers] = ([tuple(row)[1:] for row in events], history)
    serial, shared = snapshots["1"], snapshots["2"]
    fouling_units = {row[0] for row in serial[0] if row[1] == "condenser_fouling"}
    assert len(fouling_units) == 2  # rtu-1 and rtu-3, not the fault-free rtu-2
    assert sorted(shared[0]) == sorted(serial[0]) and shared[1] == serial[1]
