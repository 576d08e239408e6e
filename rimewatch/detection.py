"""The shell's side of detection: read units and readings from the store, run the pure analysis
(:mod:`rimewatch.detect.pipeline`), write events, baselines, notes and maintenance windows.

Used by ``rimewatch analyze``, ``rimewatch baseline`` and ``rimewatch faults`` and by
benchmarks/fleet_analysis.py.
"""

from __future__ import annotations

import json
import math
import multiprocessing
import os
import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field

import pandas as pd
from sqlalchemy import select

from rimewatch.detect import events as lifecycle
from rimewatch.detect import pipeline
from rimewatch.detect.reference import Baseline
from rimewatch.detect.unit import UnitInfo
from rimewatch.ingest.units import atmospheric_pressure
from rimewatch.store import connect
from rimewatch.store import events as event_store
from rimewatch.store.readings import FrameReader, read_unit_frame, to_epoch_ms
from rimewatch.store.schema import Site, Unit

#: readings read before ``since`` so start-up exclusion and steady windows see the run-up
WARM_UP = pipeline.WARM_UP


class DetectionError(ValueError):
    """A unit, period or baseline that cannot be analysed; the message says which and why."""


@dataclass(frozen=True)
class StoredUnit:
    id: int
    site: str
    info: UnitInfo


def stored_units(engine, unit_key: str | None = None, site: str | None = None) -> list[StoredUnit]:
    """Active units (optionally one unit key and/or one site) with their descriptions."""
    query = (
        select(Unit.id, Unit.key, Unit.description, Site.name, Site.elevation_m)
        .join(Site, Site.id == Unit.site_id)
        .where(Unit.retired.is_(False))
        .order_by(Site.name, Unit.key)
    )
    if unit_key is not None:
        query = query.where(Unit.key == unit_key)
    if site is not None:
        query = query.where(Site.name == site)
    with engine.connect() as conn:
        rows = conn.execute(query).all()
    if unit_key is not None and not rows:
        raise DetectionError(f"no unit {unit_key!r} in the database (run `rimewatch apply`)")
    if unit_key is not None and len(rows) > 1:
        sites = ", ".join(r.name for r in rows)
        raise DetectionError(f"unit {unit_key!r} exists at several sites ({sites}): give --site")
    out = []
    for row in rows:
        description = json.loads(row.description or "{}")
        description.setdefault("id", row.key)
        try:
            info = UnitInfo.from_description(description, atmospheric_pressure(row.elevation_m))
        except (KeyError, ValueError) as exc:
            raise DetectionError(f"unit {row.key!r}: description unusable: {exc}") from None
        out.append(StoredUnit(row.id, row.name, info))
    return out


def to_incoming(event: lifecycle.Event) -> event_store.IncomingEvent:
    """A detect event in store terms (epoch ms, JSON-ready)."""
    return event_store.IncomingEvent(
        code=event.code,
        detail=event.detail,
        start_ms=to_epoch_ms(event.start),
        end_ms=None if event.end is None else to_epoch_ms(event.end),
        detected_ms=to_epoch_ms(event.detected),
        last_seen_ms=to_epoch_ms(event.last_seen),
        severity=float(event.severity),
        confidence=float(event.confidence),
        impact=dict(event.impact),
        ranking=[[code, share] for code, share in event.ranking],
        evidence=event.evidence,
        history=tuple((to_epoch_ms(h), s, c) for h, s, c in event.history),
    )


@dataclass
class UnitResult:
    unit: str
    site: str
    mode: str = ""
    stats: dict = field(default_factory=dict)
    events: list = field(default_factory=list)
    counts: event_store.MergeCounts = field(default_factory=event_store.MergeCounts)
    closed: int = 0
    error: str | None = None


@dataclass
class Timings:
    read_s: float = 0.0
    analyse_s: float = 0.0
    write_s: float = 0.0


def load_baseline(engine, unit: StoredUnit) -> Baseline | None:
    data = event_store.active_baseline(engine, unit.id)
    return None if data is None else Baseline.from_dict(data)


def _close_cleared(conn, unit: StoredUnit, analysis) -> int:
    """Close stored open events this run saw cleared (no incoming event of theirs)."""
    closed = 0
    matched = {(e.code, e.detail) for e in analysis.events}
    for row in event_store.list_events(conn, [unit.id], include_suppressed=True, open_only=True):
        if (row["code"], row["detail"]) in matched:
            continue
        last_seen = pd.Timestamp(row["last_seen_ms"], unit="ms", tz="UTC")
        if lifecycle.cleared_after(analysis.findings, row["code"], row["detail"], last_seen):
            closed += event_store.close_event(conn, row["id"], row["last_seen_ms"])
    return closed


def analyze_stored_units(
    engine,
    units: list[StoredUnit],
    since: pd.Timestamp,
    until: pd.Timestamp,
    tariff_per_kWh: float = pipeline.DEFAULT_TARIFF_PER_KWH,
    timings: Timings | None = None,
    workers: int = 1,
) -> list[UnitResult]:
    """Analyse each unit over [since, until) and merge its events into the store.

    A unit whose data cannot be analysed gets ``error`` set; the others go on. With ``workers`` >
    1 the units are shared out over that many processes (each with its own connections); the
    results come back in the order of ``units``.
    """
    timings = timings if timings is not None else Timings()
    workers = min(workers, len(units))
    if workers > 1:
        return _analyze_in_processes(engine, units, since, until, tariff_per_kWh, timings, workers)
    with FrameReader(engine) as reader:
        return [
            _analyze_stored_unit(engine, reader, unit, since, until, tariff_per_kWh, timings)
            for unit in units
        ]


def default_workers(unit_count: int) -> int:
    """Worker processes for ``unit_count`` units: one per CPU, and one per 25 units at most."""
    return max(1, min(os.cpu_count() or 1, math.ceil(unit_count / 25)))


def analyze_share(url: str, units, since, until, tariff_per_kWh) -> tuple[list, Timings]:
    """One worker's part of :func:`analyze_stored_units`, on its own engine."""
    engine = connect(url, run_migrations=False)
    timings = Timings()
    try:
        return analyze_stored_units(engine, units, since, until, tariff_per_kWh, timings), timings
    finally:
        engine.dispose()


def _analyze_in_processes(engine, units, since, until, tariff_per_kWh, timings, workers):
    url = engine.url.render_as_string(hide_password=False)
    engine.dispose()  # no open connection is carried into the workers
    shares = [units[i::workers] for i in range(workers)]
    # fork: the workers start with the modules and property tables already imported
    methods = multiprocessing.get_all_start_methods()
    context = multiprocessing.get_context("fork" if "fork" in methods else None)
    with ProcessPoolExecutor(max_workers=workers, mp_context=context) as pool:
        parts = list(
            pool.map(
                analyze_share,
                [url] * workers,
                shares,
                [since] * workers,
                [until] * workers,
                [tariff_per_kWh] * workers,
            )
        )
    results: list[UnitResult | None] = [None] * len(units)
    for i, (share_results, share_timings) in enumerate(parts):
        results[i::workers] = share_results
        timings.read_s += share_timings.read_s
        timings.analyse_s += share_timings.analyse_s
        timings.write_s += share_timings.write_s
    return results


def _analyze_stored_unit(
    engine, reader: FrameReader, unit: StoredUnit, since, until, tariff_per_kWh, timings: Timings
) -> UnitResult:
    result = UnitResult(unit.info.key, unit.site)
    started = time.perf_counter()
    frame = reader.read(unit.id, since - WARM_UP, until)
    try:
        baseline = load_baseline(engine, unit)
    except ValueError as exc:
        result.error = f"stored baseline unusable ({exc}); run `rimewatch baseline` again"
        return result
    finally:
        timings.read_s += time.perf_counter() - started
    started = time.perf_counter()
    try:
        analysis = pipeline.analyze_unit(frame, unit.info, baseline, since, until, tariff_per_kWh)
    except ValueError as exc:
        result.error = str(exc)
        return result
    finally:
        timings.analyse_s += time.perf_counter() - started
    started = time.perf_counter()
    with engine.begin() as conn:
        result.counts = event_store.merge_events(
            conn, unit.id, [to_incoming(e) for e in analysis.events]
        )
        result.closed = _close_cleared(conn, unit, analysis)
    timings.write_s += time.perf_counter() - started
    result.mode, result.stats, result.events = (
        analysis.stats["mode"],
        analysis.stats,
        analysis.events,
    )
    return result


def fit_and_store_baseline(engine, unit: StoredUnit, start, end, now_ms: int) -> Baseline:
    """Fit reference models on [start, end) and store them as the unit's active baseline."""
    frame = read_unit_frame(engine, unit.id, pd.Timestamp(start) - WARM_UP, end)
    if frame.empty:
        raise DetectionError(f"unit {unit.info.key!r}: no readings between {start} and {end}")
    baseline = pipeline.fit_unit_baseline(frame, unit.info, start, end)
    event_store.save_baseline(
        engine, unit.id, baseline.to_dict(), to_epoch_ms(start), to_epoch_ms(end), now_ms
    )
    return baseline
