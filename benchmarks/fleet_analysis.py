"""Fleet analysis: N units x one day of one-minute data, read from the store, analysed, events
written. Target (issue 6): 1,000 units in under 15 s on this 2-core machine.

Setup (not timed): ``K`` distinct simulated units (rimewatch.sim; R410A rooftop TXV and split
orifice units, R404A cold rooms, two climates, seeds) are simulated for 7 baseline days plus the
judged day; their baselines are fitted once; N units (copies of the K with their own points,
readings and stored baseline, a quarter of them with an injected fault) go into a SQLite file via
the site file path (``apply_site``) and ``write_readings``: 14 points x 1,620 minutes per unit.

Timed, in a fresh process (so its peak memory is the analysis's own): ``analyze_stored_units``
over all units with ``--workers`` processes, split into reading (store -> wide frame), physics
(cycle states and virtual sensors, ``unit_features``), detection (everything else of the
analysis) and writing events. Beside it, in the same run, two reads of all the judged readings:
one raw SELECT through the DB-API driver (sqlite3 or psycopg: a Python tuple per row, the old
read's floor) and the store's ADBC read (Arrow columns, no Python object per reading). The
workers' CPU seconds and the load average before the run are printed too: on a shared machine the
CPU seconds / workers is the wall clock the run would take alone.

Usage: .venv/bin/python benchmarks/fleet_analysis.py [--units 1000] [--workers 2] [--db PATH|URL]
(``--db`` keeps the prepared SQLite file for later runs, or names a database by URL, e.g.
``postgresql+psycopg://postgres@127.0.0.1/fleet`` (an existing, empty database); a database that
already holds the benchmark's site is reused).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
import pandas as pd

START = datetime(2026, 7, 1, tzinfo=UTC)
DAY = START + timedelta(days=7)
UNTIL = DAY + timedelta(days=1)
WARM_UP = timedelta(hours=3)  # as rimewatch.detect.pipeline.WARM_UP
SITE = "Northgate Retail Park"
TEMPLATES = [
    # (kind, climate, seed, fault)
    ("rooftop_unit", "hot_dry", 1, None),
    ("rooftop_unit", "hot_humid", 2, None),
    ("rooftop_unit", "hot_dry", 3, ("condenser_fouling", 0.4)),
    ("split_system", "hot_humid", 4, None),
    ("split_system", "hot_dry", 5, None),
    ("split_system", "hot_humid", 6, ("low_charge", 0.2)),
    ("cold_room_condensing_unit", "mediterranean", 7, None),
    ("cold_room_condensing_unit", "hot_dry", 8, ("evaporator_airflow_low", 0.35)),
]
ROLE_UNITS = {
    "suction_pressure": "Pa", "discharge_pressure": "Pa", "liquid_pressure": "Pa",
    "suction_temp": "K", "discharge_temp": "K", "liquid_temp": "K", "outdoor_air_temp": "K",
    "condenser_leaving_air_temp": "K", "return_air_temp": "K", "return_air_humidity": "%",
    "box_temp": "K", "supply_air_temp": "K", "compressor_power": "W",
    "compressor_current": "A", "compressor_status": "on/off",
}  # fmt: skip


def _template(index: int):
    from rimewatch.detect.pipeline import fit_unit_baseline
    from rimewatch.detect.unit import UnitInfo
    from rimewatch.sim.equipment import default_unit, size_unit
    from rimewatch.sim.faults import FaultSpec
    from rimewatch.sim.scenario import Scenario, simulate_unit

    kind, climate, seed, fault = TEMPLATES[index]
    spec = default_unit(kind)
    unit = size_unit(spec)
    faults = (FaultSpec(fault[0], fault[1], DAY - timedelta(days=1)),) if fault else ()
    frame, _ = simulate_unit(
        Scenario(unit=spec, start=START, days=8, climate=climate, seed=seed, faults=faults), unit
    )
    block = {
        "id": f"t{index}",
        "name": f"{kind} template {index}",
        "kind": kind,
        "refrigerant": spec.refrigerant,
        "expansion_device": spec.expansion_device,
        "nominal_capacity_kW": spec.nominal_capacity_kW,
        "superheat_target_K": spec.design_superheat_K,
        "subcooling_target_K": spec.design_subcooling_K,
        "condenser_airflow_m3_s": spec.condenser_airflow_m3_s,
        "evaporator_airflow_m3_s": spec.evaporator_airflow_m3_s,
        "compressor_map": unit.compressor_map.to_dict(),
    }
    info = UnitInfo.from_description(block)
    baseline = fit_unit_baseline(frame, info, START, DAY - timedelta(days=1))
    judged = frame.loc[DAY - WARM_UP : UNTIL - timedelta(minutes=1)]
    return block, judged, baseline.to_dict()


def prepare(url: str, n_units: int) -> None:
    from rimewatch.site import parse_site
    from rimewatch.site_sync import apply_site
    from rimewatch.store import active_points, connect, write_readings
    from rimewatch.store.events import save_baseline
    from rimewatch.store.readings import to_epoch_ms

    started = time.perf_counter()
    with ProcessPoolExecutor(max_workers=2) as pool:
        templates = list(pool.map(_template, range(len(TEMPLATES))))
    print(
        f"setup: {len(templates)} templates simulated and fitted in "
        f"{time.perf_counter() - started:.0f} s"
    )
    units = []
    for i in range(n_units):
        block, frame, _ = templates[i % len(templates)]
        roles = [r for r in frame.columns if r in ROLE_UNITS and frame[r].notna().any()]
        units.append(
            {**block, "id": f"u{i:04d}", "name": f"unit {i}",
             "points": [{"role": r, "unit": ROLE_UNITS[r], "mqtt_topic": f"fleet/{i}/{r}"}
                        for r in roles]}
        )  # fmt: skip
    config = parse_site({"site": {"name": SITE, "timezone": "UTC"}, "units": units})
    engine = connect(url)
    apply_site(engine, config)
    points: dict[str, dict[str, int]] = {}
    for p in active_points(engine, SITE):
        points.setdefault(p.unit_key, {})[p.role] = p.id
    unit_ids = {}
    with engine.connect() as conn:
        from sqlalchemy import text

        for key, uid in conn.execute(text("SELECT key, id FROM units")):
            unit_ids[key] = uid
    started = time.perf_counter()
    stored = 0
    for i in range(n_units):
        block, frame, baseline = templates[i % len(templates)]
        key = f"u{i:04d}"
        ts = frame.index.as_unit("ms").asi8
        rows = []
        for role, point_id in points[key].items():
            values = frame[role].to_numpy()
            keep = np.isfinite(values) & (np.abs(values) < 1e8)
            rows.extend(zip([point_id] * int(keep.sum()), ts[keep].tolist(), values[keep].tolist(),
                            strict=True))  # fmt: skip
        stored += write_readings(engine, rows)
        save_baseline(engine, unit_ids[key], baseline, to_epoch_ms(START), to_epoch_ms(DAY), 0)
    print(
        f"setup: {stored:,} readings of {n_units} units written in "
        f"{time.perf_counter() - started:.0f} s"
    )


def _children_cpu_s() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def _analyse_share(args):
    url, units = args
    from rimewatch.detect import pipeline
    from rimewatch.detect.pipeline import DEFAULT_TARIFF_PER_KWH
    from rimewatch.detection import analyze_share

    physics_s = [0.0]
    original = pipeline.unit_features

    def timed_features(*a, **k):
        began = time.perf_counter()
        try:
            return original(*a, **k)
        finally:
            physics_s[0] += time.perf_counter() - began

    pipeline.unit_features = timed_features
    cpu_started = time.process_time() + _children_cpu_s()
    results, timings = analyze_share(
        url, units, pd.Timestamp(DAY), pd.Timestamp(UNTIL), DEFAULT_TARIFF_PER_KWH
    )
    errors = [r.error for r in results if r.error]
    events = sum(len(r.events) for r in results)
    cpu_s = time.process_time() + _children_cpu_s() - cpu_started  # with the reader process
    # the worker and its reader process (counted whole: their shared pages twice)
    rss_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    rss_kb += resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return timings.read_s, physics_s[0], timings.analyse_s - physics_s[0], timings.write_s, \
        events, errors, rss_kb, cpu_s  # fmt: skip


def analyse(url: str, workers: int) -> dict:
    """The timed part (run in a fresh process by main)."""
    from rimewatch.detection import stored_units
    from rimewatch.store import connect

    units = stored_units(connect(url), site=SITE)
    shares = [(url, units[i::workers]) for i in range(workers)]
    load_before = os.getloadavg()[0]
    started = time.perf_counter()
    with ProcessPoolExecutor(max_workers=workers) as pool:
        parts = list(pool.map(_analyse_share, shares))
    wall = time.perf_counter() - started
    parent_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return {
        "units": len(units),
        "wall_s": wall,
        "read_s": sum(p[0] for p in parts),
        "physics_s": sum(p[1] for p in parts),
        "detection_s": sum(p[2] for p in parts),
        "write_s": sum(p[3] for p in parts),
        "cpu_s": sum(p[7] for p in parts),
        "load_before": load_before,
        "events": sum(p[4] for p in parts),
        "errors": [e for p in parts for e in p[5]][:5],
        "peak_rss_mb_per_worker": max(p[6] for p in parts) / 1024.0,
        "peak_rss_mb_total": (sum(p[6] for p in parts) + parent_rss) / 1024.0,
    }


def _judged_ms() -> tuple[int, int]:
    start_ms = int((pd.Timestamp(DAY) - pd.Timedelta(WARM_UP)).timestamp() * 1000)
    return start_ms, int(pd.Timestamp(UNTIL).timestamp() * 1000)


def raw_read_floor(url: str) -> tuple[float, int]:
    """One plain SELECT of every judged reading through the DB-API driver (sqlite3, psycopg),
    streamed: the floor of a read that builds a Python tuple per row."""
    from rimewatch.store import connect

    engine = connect(url)
    start_ms, end_ms = _judged_ms()
    marker = "?" if engine.dialect.paramstyle == "qmark" else "%s"
    began = time.perf_counter()
    count = 0
    raw = engine.raw_connection()
    try:
        cursor = raw.cursor()
        cursor.execute(
            "SELECT point_id, ts_ms, value FROM readings "
            f"WHERE ts_ms >= {marker} AND ts_ms < {marker}",
            (start_ms, end_ms),
        )
        while rows := cursor.fetchmany(100_000):
            count += len(rows)
        cursor.close()
    finally:
        raw.close()
    return time.perf_counter() - began, count


def adbc_read(url: str) -> tuple[float, int]:
    """The same readings through the store's ADBC path, 14 points a request (as for a unit)."""
    from sqlalchemy import text

    from rimewatch.store import connect
    from rimewatch.store.columnar import open_columnar

    engine = connect(url)
    start_ms, end_ms = _judged_ms()
    with engine.connect() as conn:
        points = [p for (p,) in conn.execute(text("SELECT id FROM points ORDER BY id"))]
    began = time.perf_counter()
    reader = open_columnar(engine)
    count = 0
    for first in range(0, len(points), 14):
        queries = [
            f"SELECT ts_ms, value FROM readings WHERE point_id = {point} "
            f"AND ts_ms >= {start_ms} AND ts_ms < {end_ms} ORDER BY ts_ms"
            for point in points[first : first + 14]
        ]
        count += sum(len(times) for times, _ in reader.fetch_many(queries, (np.int64, np.float64)))
    reader.close()
    return time.perf_counter() - began, count


def _prepared_units(url: str) -> int:
    """Units of the benchmark's site already in the database (0 for a new one)."""
    from sqlalchemy import text

    from rimewatch.store import connect

    with connect(url).connect() as conn:
        return conn.execute(
            text("SELECT count(*) FROM units JOIN sites ON sites.id = units.site_id "
                 "WHERE sites.name = :site"),
            {"site": SITE},
        ).scalar()  # fmt: skip


def _clear_events(url: str) -> None:
    from sqlalchemy import text

    from rimewatch.store import connect

    with connect(url).begin() as conn:
        for table in ("event_history", "notes", "events"):
            conn.execute(text(f"DELETE FROM {table}"))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--units", type=int, default=1000)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument(
        "--db",
        default=None,
        help="keep the prepared SQLite file here, or a database URL (postgresql://...)",
    )
    parser.add_argument(
        "--phase", default="all", choices=["all", "analyse"], help=argparse.SUPPRESS
    )
    args = parser.parse_args()
    if args.phase == "analyse":
        print(json.dumps(analyse(args.db, args.workers)))
        return
    folder = None
    if args.db and "://" in args.db:
        url = args.db
    elif args.db:
        url = f"sqlite:///{Path(args.db).resolve()}"
    else:
        folder = tempfile.TemporaryDirectory()
        url = f"sqlite:///{Path(folder.name) / 'fleet.db'}"
    if _prepared_units(url) == 0:
        prepare(url, args.units)
    else:
        print(f"setup: reusing {url}")
    _clear_events(url)
    out = subprocess.run(
        [sys.executable, __file__, "--phase", "analyse", "--db", url,
         "--workers", str(args.workers)],
        capture_output=True, text=True, check=False, env={**os.environ},
    )  # fmt: skip
    if out.returncode != 0:
        print(out.stderr)
        raise SystemExit("the timed analysis failed")
    r = json.loads(out.stdout.strip().splitlines()[-1])
    floor_s, floor_rows = raw_read_floor(url)
    adbc_s, adbc_rows = adbc_read(url)
    cpu = r["read_s"] + r["physics_s"] + r["detection_s"] + r["write_s"]
    print(f"\n{r['units']} units x 1 day (+3 h warm-up), {args.workers} worker processes")
    print(f"  wall clock                      {r['wall_s']:8.1f} s   (target < 15 s)")
    parts = (("reading", "read_s"), ("physics", "physics_s"), ("detection", "detection_s"),
             ("writing", "write_s"))  # fmt: skip
    for label, key in parts:
        print(f"  summed over workers: {label:<10} {r[key]:8.1f} s  ({100 * r[key] / cpu:.0f} %)")
    print(
        f"  CPU time of the workers         {r['cpu_s']:8.1f} s   (/ {args.workers} workers = "
        f"{r['cpu_s'] / args.workers:.1f} s: the wall clock on an otherwise idle machine)"
    )
    print(
        f"  load average before the run     {r['load_before']:8.2f}   (other work shares the cores)"
    )
    driver = "sqlite3" if url.startswith("sqlite") else "psycopg"
    print(f"  baseline: raw {driver} SELECT of the same {floor_rows:,} readings: {floor_s:.1f} s")
    print(f"  the store's ADBC read of the same {adbc_rows:,} readings: {adbc_s:.1f} s")
    print(
        f"  events written {r['events']}; peak RSS {r['peak_rss_mb_per_worker']:.0f} MB per "
        f"worker with its reader, {r['peak_rss_mb_total']:.0f} MB all processes"
    )
    if r["errors"]:
        print("  errors:", r["errors"])
    print(
        f"RESULT units={r['units']} wall_s={r['wall_s']:.1f} read_s={r['read_s']:.1f} "
        f"physics_s={r['physics_s']:.1f} detection_s={r['detection_s']:.1f} "
        f"write_s={r['write_s']:.1f} cpu_s={r['cpu_s']:.1f} raw_select_s={floor_s:.1f} "
        f"adbc_read_s={adbc_s:.1f} "
        f"events={r['events']} "
        f"peak_rss_mb={r['peak_rss_mb_total']:.0f} load_before={r['load_before']:.1f} "
        f"target_wall_s=15"
    )
    if folder is not None:
        folder.cleanup()


if __name__ == "__main__":
    main()
