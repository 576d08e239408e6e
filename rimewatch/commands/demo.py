"""``rimewatch demo``: an invented site simulated for a few weeks, run through the whole pipeline.

Steps, each the same code the ordinary commands run:

1. simulate every unit of the invented site, faults injected (``rimewatch simulate``'s site
   document and CSV layout), and write the site file, one trend-log CSV per unit and the ground
   truth;
2. ``apply`` the site file and ``import`` the CSVs into a SQLite file in the demo folder;
3. the commissioning check of every unit on its first days of stored readings (GO / NO-GO,
   HTML report);
4. physics on the stored readings: cycle states and virtual sensors (COP, capacity), daily
   medians and a p-h diagram of each unit's typical cycle, first days against last days;
5. detection on the stored readings: a baseline fitted on the fault-free first quarter, the rest
   analysed against it, events stored.

Units run side by side in forked worker processes (one per core), the libraries imported once
before the fork. Everything printed as found comes from the pipeline; the ground truth (what
was injected) is printed beside it, labelled as such, for comparison only.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from pathlib import Path

import click
import pandas as pd
import yaml

SITE_NAME = "Hollowell Street Market"  # invented, like its units, weather and faults
DEMO_START = datetime(2026, 7, 6, tzinfo=UTC)
DEMO_CLIMATE = "hot_humid"
DB_FILE = "demo.db"
SITE_FILE = "site.yaml"
TRUTH_FILE = "ground_truth.json"
DAILY_FILE = "daily-summary.csv"
FINDINGS_FILE = "findings.json"
# consecutive running minutes before a sample counts as steady (start-up transients die out)
STEADY_AFTER_MIN = 10
# share of the period at each end whose steady samples form the "first days" / "last days" cycles
TYPICAL_WINDOW_SHARE = 0.2
# commissioning looks at the first days of data, before any fault starts (at 30 % of the period)
COMMISSION_SHARE = 0.25
COMMISSION_MAX_DAYS = 3.0
# detection's fault-free baseline: the first quarter of the period (faults start at 30 %)
BASELINE_SHARE = 0.25


@dataclass(frozen=True)
class DemoFault:
    """A fault injected into one unit, placed in the period by shares of its length."""

    code: str
    severity: float
    onset_share: float  # onset after this share of the period
    ramp_share: float  # full severity this share of the period later
    extra: str = ""  # further ``key=value`` parts of the fault text, e.g. ``point=..:kind=..``

    def text(self, start: datetime, days: float) -> str:
        """The fault in ``rimewatch simulate --fault`` syntax."""
        onset = start + timedelta(days=days * self.onset_share)
        ramp_h = round(days * self.ramp_share * 24.0, 2)
        extra = f":{self.extra}" if self.extra else ""
        return (
            f"{self.code}:severity={self.severity}:onset={onset.isoformat()}:ramp={ramp_h}h{extra}"
        )


@dataclass(frozen=True)
class DemoUnit:
    """One invented refrigeration circuit of the demo site."""

    unit_id: str
    name: str
    kind: str
    refrigerant: str
    expansion_device: str
    display_units: str  # SI or IP: the units its controller logs in
    faults: tuple[DemoFault, ...] = ()


DEMO_UNITS = (
    DemoUnit(
        "rtu-1",
        "Sales floor rooftop unit",
        "rooftop_unit",
        "R410A",
        "txv",
        "IP",
        (DemoFault("low_charge", 0.3, 0.3, 0.5),),  # a slow leak over about two weeks
    ),
    DemoUnit(
        "cr-1",
        "Dairy cold room condensing unit",
        "cold_room_condensing_unit",
        "R404A",
        "txv",
        "SI",
        (DemoFault("condenser_fouling", 0.5, 0.4, 0.25),),  # cottonwood seeds on the coil
    ),
    DemoUnit(
        "rtu-2",
        "Bakery rooftop unit",
        "rooftop_unit",
        "R410A",
        "txv",
        "IP",
        (DemoFault("sensor_fault", 0.6, 0.45, 0.0, "point=suction_temp:kind=drift"),),
    ),
    DemoUnit(
        "sp-1",
        "Back office split system",
        "split_system",
        "R32",
        "fixed_orifice",
        "SI",
    ),
)


@dataclass
class UnitOutcome:
    """What the pipeline produced for one unit (plus its ground truth, kept apart)."""

    unit: DemoUnit
    csv_path: Path
    truth: dict
    readings_stored: int = 0
    quarantined: int = 0
    commission_go: bool | None = None
    commission_blockers: tuple[str, ...] = ()
    commission_html: Path | None = None
    daily: pd.DataFrame | None = None
    diagram: Path | None = None
    cycle_flags: tuple[str, ...] = ()
    detection: dict | None = None  # mode, period, stats, events as found (JSON-ready)


def _scenario(unit: DemoUnit, days: float, seed: int):
    from rimewatch.sim.equipment import default_unit
    from rimewatch.sim.faults import parse_fault
    from rimewatch.sim.scenario import Scenario

    spec = default_unit(unit.kind, unit.refrigerant, unit.expansion_device)
    faults = tuple(parse_fault(f.text(DEMO_START, days)) for f in unit.faults)
    return Scenario(
        unit=spec,
        start=DEMO_START,
        days=days,
        climate=DEMO_CLIMATE,
        seed=seed,
        faults=faults,
        site_name=SITE_NAME,
        unit_id=unit.unit_id,
        timezone="America/Chicago",
        elevation_m=180.0,
    )


def simulate_unit_files(unit: DemoUnit, days: float, seed: int, out: Path):
    """Simulate one demo unit and write its trend-log CSV (``rimewatch simulate``'s layout, with
    columns ``<unit id>/<role>`` so one site file maps every unit's export).

    Returns ``(site document of this unit, UnitOutcome)``.
    """
    from rimewatch.commands.simulate import _slug, display_frame, site_document
    from rimewatch.sim.scenario import simulate_unit

    scenario = _scenario(unit, days, seed)
    readings, truth = simulate_unit(scenario)
    prefix = f"{_slug(SITE_NAME)}/{unit.unit_id}"
    document = site_document(scenario, truth.unit, unit.display_units, prefix, list(readings))
    block = document["units"][0]
    block["name"] = unit.name
    for point in block["points"]:
        point["csv_column"] = f"{unit.unit_id}/{point['role']}"

    frame = display_frame(readings, unit.display_units, scenario.atmospheric_pressure)
    frame.columns = [f"{unit.unit_id}/{role}" for role in frame.columns]
    frame.index = frame.index.strftime("%Y-%m-%dT%H:%M:%SZ")
    frame.index.name = "timestamp"
    csv_path = out / "data" / f"{unit.unit_id}.csv"
    csv_path.parent.mkdir(exist_ok=True)
    frame.to_csv(csv_path)
    return document, UnitOutcome(unit, csv_path, truth.summary())


def write_site_file(out: Path, documents: list[dict]) -> Path:
    """One site file holding every unit's block."""
    site = {**documents[0], "units": [d["units"][0] for d in documents]}
    site["site"] = {**site["site"], "display_units": "SI"}
    path = out / SITE_FILE
    path.write_text(
        "# Written by `rimewatch demo`: an invented site, units and data.\n"
        + yaml.safe_dump(site, sort_keys=False)
    )
    return path


def import_unit(engine, config, outcome: UnitOutcome) -> None:
    """``rimewatch import --unit``: the unit's CSV into the store (the site applied before)."""
    from rimewatch.ingest.csv_import import import_csv
    from rimewatch.site_sync import csv_targets

    fmt, columns, site_id = csv_targets(engine, config, outcome.unit.unit_id)
    result = import_csv(
        engine, outcome.csv_path, fmt, columns, config.atmospheric_pressure_Pa, site_id=site_id
    )
    outcome.readings_stored = result.readings_stored + result.readings_already_stored
    outcome.quarantined = result.quarantined


def steady_running(frame: pd.DataFrame) -> pd.Series:
    """True where the compressor has run for ``STEADY_AFTER_MIN`` minutes or more
    (:func:`rimewatch.physics.standstill.operating_state`)."""
    from rimewatch.physics import standstill

    state = standstill.operating_state(frame, min_running_s=STEADY_AFTER_MIN * 60.0)
    return pd.Series(state.to_numpy() == standstill.RUNNING, index=frame.index)


def unit_physics(frame: pd.DataFrame, unit_config, config) -> pd.DataFrame:
    """Cycle states and virtual sensors of the steady running samples (SI)."""
    from rimewatch.physics.compressor import CompressorMap
    from rimewatch.physics.cycle import cycle_states
    from rimewatch.physics.virtual_sensors import AirReadings, compute

    running = frame[steady_running(frame)]
    states = cycle_states(
        unit_config.refrigerant,
        running["suction_pressure"],
        running["discharge_pressure"],
        suction_temp=running["suction_temp"],
        liquid_temp=running["liquid_temp"],
        discharge_temp=running["discharge_temp"],
    )
    block = config.compressor_map_for(unit_config)
    air = AirReadings(
        return_air_temp=running.get("return_air_temp"),
        return_air_humidity=running.get("return_air_humidity"),
        supply_air_temp=running.get("supply_air_temp"),
        outdoor_air_temp=running.get("outdoor_air_temp"),
        condenser_leaving_air_temp=running.get("condenser_leaving_air_temp"),
        pressure=config.atmospheric_pressure_Pa,
    )
    virtual = compute(
        states,
        running["suction_pressure"],
        compressor_map=CompressorMap.from_dict(block) if block else None,
        compressor_power=running.get("compressor_power"),
        air=air,
    )
    shared = virtual.columns.intersection(states.columns)
    return states.join(virtual.rename(columns={c: f"{c}_virtual" for c in shared}))


def daily_summary(physics: pd.DataFrame) -> pd.DataFrame:
    """Per UTC day: medians of COP, capacity [W], superheat and subcooling [K], and sample count.

    Flagged samples count too (medians are robust to the odd bad one); a quantity a sample's
    flags leave undefined is NaN there and skipped.
    """
    columns = ["cop_virtual", "cooling_capacity", "superheat", "subcooling", "t_evap", "t_cond"]
    grouped = physics[columns].groupby(physics.index.floor("1D"))
    daily = grouped.median()
    daily["steady_samples"] = grouped.size()
    daily.index.name = "date"
    return daily


def typical_cycles(frame: pd.DataFrame, refrigerant: str) -> tuple[pd.DataFrame, dict]:
    """Cycle states of the median steady readings of the period's first and last days."""
    from rimewatch.physics.cycle import cycle_states

    running = frame[steady_running(frame)]
    if running.empty:
        return pd.DataFrame(), {}
    span = running.index[-1] - running.index[0]
    window = span * TYPICAL_WINDOW_SHARE
    roles = ["suction_pressure", "discharge_pressure", "suction_temp", "liquid_temp",
             "discharge_temp"]  # fmt: skip
    first = running.loc[: running.index[0] + window, roles].median()
    last = running.loc[running.index[-1] - window :, roles].median()
    medians = pd.DataFrame([first, last], index=["first days", "last days"])
    states = cycle_states(refrigerant, **{r: medians[r] for r in roles}, method="exact")
    pressures = {"suction": medians["suction_pressure"], "discharge": medians["discharge_pressure"]}
    return states, pressures


def commission_unit(engine, config, outcome: UnitOutcome, days: float, out: Path):
    """``rimewatch commission`` on the first days of stored readings (HTML report, GO / NO-GO).

    Returns all the unit's stored readings (SI, one column per role).
    """
    from rimewatch.commands.commission import _unit_spec
    from rimewatch.report.commission import build_unit_report, render_html
    from rimewatch.store import find_unit_id, read_unit_frame

    unit_config = config.unit(outcome.unit.unit_id)
    key = find_unit_id(engine, config.site.name, unit_config.id)
    frame = read_unit_frame(engine, key, DEMO_START, DEMO_START + timedelta(days=days))
    window_end = DEMO_START + timedelta(days=min(COMMISSION_MAX_DAYS, days * COMMISSION_SHARE))
    report = build_unit_report(
        _unit_spec(unit_config), frame[frame.index < window_end], config.atmospheric_pressure_Pa
    )
    outcome.commission_go = report.go
    outcome.commission_blockers = tuple(report.blockers)
    outcome.commission_html = out / f"commission-{unit_config.id}.html"
    outcome.commission_html.write_text(
        render_html([report], config.site.name, datetime.now(UTC)), encoding="utf-8"
    )
    return frame


def physics_and_diagram(config, outcome: UnitOutcome, frame: pd.DataFrame, out: Path) -> None:
    """Cycle states and virtual sensors, daily medians, p-h diagram of the typical cycles."""
    from rimewatch.physics.refrigerant import get_refrigerant
    from rimewatch.report.ph_diagram import ph_diagram, save_figure

    unit_config = config.unit(outcome.unit.unit_id)
    physics = unit_physics(frame, unit_config, config)
    outcome.daily = daily_summary(physics)
    reasons = physics["flags"].astype(str).str.split("; ").explode()
    reasons = reasons[(reasons != "") & ~reasons.str.endswith(" missing")]
    outcome.cycle_flags = tuple(
        f"{reason}: {count} of {len(physics)} steady samples"
        for reason, count in reasons.value_counts().items()
    )
    states, pressures = typical_cycles(frame, unit_config.refrigerant)
    if not states.empty:
        figure = ph_diagram(
            get_refrigerant(unit_config.refrigerant),
            states,
            pressures["suction"].to_numpy(),
            pressures["discharge"].to_numpy(),
            labels=list(states.index),
            unit_system=outcome.unit.display_units,
            title=f"{unit_config.id} {unit_config.name}: {unit_config.refrigerant}",
        )
        outcome.diagram = save_figure(figure, out / f"{unit_config.id}-ph.png")


def _event_record(event) -> dict:
    """A detection event as plain JSON-ready values."""
    return {
        "code": event.code,
        "detail": event.detail,
        "start": event.start.isoformat(),
        "end": None if event.end is None else event.end.isoformat(),
        "severity": round(float(event.severity), 3),
        "severity_label": event.severity_label,
        "confidence": round(float(event.confidence), 3),
        "impact": dict(event.impact),
        "ranking": [[code, round(float(share), 3)] for code, share in event.ranking],
        "evidence": event.evidence,
    }


def detect_faults(engine, config, outcome: UnitOutcome, days: float) -> None:
    """``rimewatch baseline`` on the first quarter, then ``rimewatch analyze`` on the rest.

    Events are stored in the database as the ordinary commands store them.
    """
    from rimewatch import detection
    from rimewatch.store import to_epoch_ms

    start = pd.Timestamp(DEMO_START)
    baseline_end = start + pd.Timedelta(days=days * BASELINE_SHARE)
    end = start + pd.Timedelta(days=days)
    [unit] = detection.stored_units(engine, outcome.unit.unit_id, config.site.name)
    found = {"baseline": None, "period": [baseline_end.isoformat(), end.isoformat()]}
    try:
        now_ms = to_epoch_ms(pd.Timestamp.now(tz="UTC"))
        detection.fit_and_store_baseline(engine, unit, start, baseline_end, now_ms)
        found["baseline"] = [start.isoformat(), baseline_end.isoformat()]
    except ValueError as exc:  # too little fault-free data: the day-one rules judge
        found["baseline_error"] = str(exc)
    [result] = detection.analyze_stored_units(engine, [unit], baseline_end, end)
    found.update(
        mode=result.mode,
        error=result.error,
        stats=result.stats,
        events=[_event_record(e) for e in result.events],
    )
    outcome.detection = found


# imported before the pool workers are forked, so they share them
PRELOADED_MODULES = (
    "rimewatch.sim.scenario",
    "rimewatch.detection",
    "rimewatch.ingest.csv_import",
    "rimewatch.report.commission",
    "rimewatch.report.ph_diagram",
    "rimewatch.physics.virtual_sensors",
)
_progress_queue = None  # set in pool workers: where they report finished steps


def _start_worker(queue) -> None:
    global _progress_queue
    _progress_queue = queue


def _report(text: str) -> None:
    if _progress_queue is not None:
        _progress_queue.put(text)


def _simulate_job(unit: DemoUnit, days: float, seed: int, out: Path):
    result = simulate_unit_files(unit, days, seed, out)
    _report(f"{unit.unit_id} simulated")
    return result


def _pipeline_job(outcome: UnitOutcome, site_path: Path, db_url: str, days: float, out: Path):
    """Import, commissioning, physics and detection of one unit, in its own database session."""
    from rimewatch.site import load_site
    from rimewatch.store import connect

    config = load_site(site_path)
    engine = connect(db_url)
    try:
        import_unit(engine, config, outcome)
        _report(f"{outcome.unit.unit_id} imported")
        frame = commission_unit(engine, config, outcome, days, out)
        _report(f"{outcome.unit.unit_id} commissioned")
        physics_and_diagram(config, outcome, frame, out)
        _report(f"{outcome.unit.unit_id} cycle physics")
        detect_faults(engine, config, outcome, days)
        _report(f"{outcome.unit.unit_id} detection")
    finally:
        engine.dispose()
    return outcome


def _run_jobs(pool, queue, jobs, advance) -> list:
    """Submit ``(function, args)`` jobs; advance the progress bar per reported step; results in
    job order."""
    import contextlib
    import queue as queue_module

    pending = [pool.apply_async(function, args) for function, args in jobs]
    while not all(job.ready() for job in pending):
        with contextlib.suppress(queue_module.Empty):
            advance(queue.get(timeout=0.1))
        advance(None)
    while not queue.empty():
        advance(queue.get())
    return [job.get() for job in pending]


def _write_tables(outcomes: list[UnitOutcome], out: Path) -> None:
    """The daily medians of every unit (CSV) and what detection found (JSON)."""
    daily = [o.daily.assign(unit=o.unit.unit_id) for o in outcomes if o.daily is not None]
    if daily:
        table = pd.concat(daily).reset_index().set_index(["unit", "date"])
        table.to_csv(out / DAILY_FILE, float_format="%.5g")
    findings = {o.unit.unit_id: o.detection for o in outcomes}
    (out / FINDINGS_FILE).write_text(json.dumps(findings, indent=2, default=str))


def _remove_previous_run(out: Path) -> None:
    """Delete the files a previous demo run left in ``out`` (only the demo's own file names)."""
    names = [DB_FILE, f"{DB_FILE}-wal", f"{DB_FILE}-shm", SITE_FILE, TRUTH_FILE, DAILY_FILE,
             FINDINGS_FILE]  # fmt: skip
    for unit in DEMO_UNITS:
        names += [f"data/{unit.unit_id}.csv", f"commission-{unit.unit_id}.html",
                  f"{unit.unit_id}-ph.png"]  # fmt: skip
    for name in names:
        (out / name).unlink(missing_ok=True)


def _format_truth(truth: dict) -> list[str]:
    """Ground-truth lines of one unit: each fault as injected and the loss on the last day."""
    if not truth["faults"]:
        return ["no fault injected (healthy unit)"]
    lines = []
    for fault in truth["faults"]:
        onset = f"from {fault['onset'][:16].replace('T', ' ')} UTC"
        if fault["code"] == "sensor_fault" and fault["kind"] == "drift":
            # the simulator's drift rate: severity x 1 K (temperatures) per day
            lines.append(
                f"sensor_fault: {fault['point']} drifting {fault['severity']:g} K per day {onset}"
            )
            continue
        what = fault["code"]
        if fault["code"] == "sensor_fault":
            what += f" ({fault['kind']} of {fault['point']})"
        ramp = f", ramp over {fault['ramp_days']:.1f} days" if fault["ramp_days"] else ", step"
        lines.append(f"{what}: severity {fault['severity']:g} {onset}{ramp}")
    if truth["daily"]:
        last = truth["daily"][-1]
        lines.append(
            f"last day: capacity {last['capacity_loss_pct']:.1f} % lost, COP "
            f"{last['cop_loss_pct']:.1f} % lost (against the same minutes fault-free)"
        )
    return lines


def _comparison(outcome: UnitOutcome) -> str:
    """Each injected fault matched with the detection event of the same code (and point)."""
    events = (outcome.detection or {}).get("events", [])
    faults = outcome.truth["faults"]
    if not faults:
        if not events:
            return "healthy unit, no event: correct"
        return f"healthy unit, {len(events)} event(s): false alarm"
    parts = []
    for fault in faults:
        matches = [
            e
            for e in events
            if e["code"] == fault["code"]
            and (fault["code"] != "sensor_fault" or e["detail"].startswith(f"{fault['point']}:"))
        ]
        if matches:
            delay = pd.Timestamp(matches[0]["start"]) - pd.Timestamp(fault["onset"])
            parts.append(
                f"{fault['code']} found, event from {delay / pd.Timedelta('1D'):.1f} days "
                "after the onset"
            )
        else:
            parts.append(f"{fault['code']} not found")
    others = [e["code"] for e in events if not any(e["code"] == f["code"] for f in faults)]
    if others:
        parts.append(f"also raised: {', '.join(others)}")
    return "; ".join(parts)


def _trend_table(outcome: UnitOutcome):
    from rich import box
    from rich.table import Table

    daily = outcome.daily
    table = Table(box=box.SIMPLE_HEAD, padding=(0, 1))
    table.add_column("daily median (steady running)")
    ip = outcome.unit.display_units == "IP"
    rows = (
        ("COP", "cop_virtual", 1.0, "{:.2f}", ""),
        ("cooling capacity", "cooling_capacity", 1e-3, "{:.1f}", "kW"),
        ("superheat", "superheat", 1.8 if ip else 1.0, "{:.1f}", "°F" if ip else "K"),
        ("subcooling", "subcooling", 1.8 if ip else 1.0, "{:.1f}", "°F" if ip else "K"),
    )
    picks = list(dict.fromkeys([daily.index[0], daily.index[len(daily) // 2], daily.index[-1]]))
    for day in picks:
        table.add_column(day.strftime("%b %d"), justify="right")
    table.add_column("")
    for label, column, scale, fmt, unit in rows:
        values = [daily.at[day, column] * scale for day in picks]
        table.add_row(label, *(fmt.format(v) if math.isfinite(v) else "–" for v in values), unit)
        if not all(math.isfinite(v) for v in values):
            table.caption = "–: no sample of that day gives it (see the cycle flags)"
    return table


def _stamp(text: str) -> str:
    return pd.Timestamp(text).strftime("%b %d %H:%M")


def _impact_text(impact: dict) -> str:
    parts = []
    if "capacity_loss_pct" in impact:
        parts.append(f"capacity {impact['capacity_loss_pct']:.1f} % lost")
    if "cop_loss_pct" in impact:
        parts.append(f"COP {impact['cop_loss_pct']:.1f} % lost")
    if "extra_kwh_per_day" in impact:
        parts.append(f"{impact['extra_kwh_per_day']:.1f} kWh/day extra")
    return ", ".join(parts)


def _found_lines(found: dict) -> list[str]:
    """What detection found for one unit, as printed (from the pipeline's events only)."""
    if found.get("error"):
        return [f"not analysed: {found['error']}"]
    stats = found["stats"]
    start, end = found["period"]
    if found["baseline"]:
        basis = f"against its baseline {_stamp(found['baseline'][0])} to {_stamp(start)}"
    else:
        basis = f"by the day-one rules (no baseline: {found.get('baseline_error', '')})"
    lines = [
        f"analysed {_stamp(start)} to {_stamp(end)} UTC {basis}; "
        f"{stats['steady_minutes']} steady minutes, {stats['hours_judged']} hours judged"
    ]
    for event in found["events"]:
        code = event["code"] + (f" ({event['detail']})" if event["detail"] else "")
        state = "open" if event["end"] is None else f"cleared {_stamp(event['end'])}"
        impact = _impact_text(event["impact"])
        lines.append(
            f"EVENT {code}: {event['severity_label']}, confidence {event['confidence']:.0%}, "
            f"from {_stamp(event['start'])} UTC, {state}" + (f"; {impact}" if impact else "")
        )
    if not found["events"]:
        lines.append("no fault event")
    return lines


def _print_results(console, outcomes, out: Path) -> None:
    from rich.markup import escape

    from rimewatch.commands.cycle import cautions
    from rimewatch.physics.refrigerant import get_refrigerant

    for outcome in outcomes:
        unit = outcome.unit
        console.rule(
            f"[bold]{escape(unit.unit_id)}[/] {escape(unit.name)} · {unit.refrigerant} · "
            f"{unit.kind.replace('_', ' ')} · {unit.expansion_device.replace('_', ' ')}"
        )
        console.print(
            f"stored {outcome.readings_stored:,} readings, {outcome.quarantined} quarantined "
            "(garbage values the simulated logger wrote)"
        )
        verdict = "[green]GO[/]" if outcome.commission_go else "[red]NO-GO[/]"
        console.print(f"commissioning: {verdict}")
        for blocker in outcome.commission_blockers[:3]:
            console.print(f"  - {escape(blocker)}")
        if outcome.daily is not None and len(outcome.daily):
            console.print(_trend_table(outcome))
        for flag in outcome.cycle_flags[:3]:
            console.print(f"  [yellow]cycle flag:[/] {escape(flag)}")
        console.print("[bold]found[/] (rimewatch detection on the stored readings):")
        for line in _found_lines(outcome.detection):
            style = "bold red" if line.startswith("EVENT") else ""
            console.print(f"  [{style}]{escape(line)}[/]" if style else f"  {escape(line)}")
        console.print("[bold]ground truth[/] (what the simulator injected, for comparison only):")
        for line in _format_truth(outcome.truth):
            console.print(f"  {escape(line)}")
        console.print(f"[bold]found against injected:[/] {escape(_comparison(outcome))}")
        files = [p.name for p in (outcome.commission_html, outcome.diagram) if p is not None]
        console.print(f"[dim]files: {escape(', '.join(files))}[/]")
        console.print()

    shown = set()
    for outcome in outcomes:
        for line in cautions(get_refrigerant(outcome.unit.refrigerant)):
            if line not in shown:
                shown.add(line)
                console.print(f"[bold]caution:[/] {escape(line)}")
    console.print(f"\nOutputs in {escape(str(out.resolve()))}:")
    listing = [
        (DB_FILE, "SQLite database (readings, site, points, quarantine)"),
        (SITE_FILE, "site file (rimewatch apply / import / commission)"),
        ("data/", "trend-log CSVs, one per unit"),
        (TRUTH_FILE, "ground truth: faults injected, daily capacity and COP loss"),
        (DAILY_FILE, "daily medians per unit: COP, capacity, superheat, subcooling"),
        (FINDINGS_FILE, "what detection found per unit (events, as stored in the database)"),
        ("commission-<unit>.html", "commissioning reports"),
        ("<unit>-ph.png", "p-h diagrams, first days against last days"),
    ]
    for name, what in listing:
        console.print(f"  {escape(name):<24} {escape(what)}")
    console.print(
        "\nTry:\n"
        f"  rimewatch faults --db sqlite:///{escape(str(out.resolve() / DB_FILE))}\n"
        f"  rimewatch commission {escape(str(out / SITE_FILE))} "
        f"--db sqlite:///{escape(str(out.resolve() / DB_FILE))} --unit cr-1"
    )


@click.command()
@click.option(
    "--out",
    "out_dir",
    type=click.Path(file_okay=False, path_type=Path),
    default=Path("rimewatch-demo"),
    show_default=True,
    help="Folder for the database, data, reports and diagrams (a previous demo run is replaced).",
)
@click.option(
    "--days",
    type=click.FloatRange(2.0, 60.0),
    default=28.0,
    show_default=True,
    help="Days to simulate; faults are placed at the same shares of the period.",
)
@click.option("--seed", type=int, default=7, show_default=True, help="Same seed, same data.")
def demo(out_dir: Path, days: float, seed: int) -> None:
    """Simulate an invented site for a few weeks and run it through the whole pipeline.

    Four invented units (R410A rooftop units with thermostatic valves, an R404A cold-room
    condensing unit, an R32 split system with a fixed orifice), one-minute data, with a slow
    refrigerant leak, a fouling condenser coil and a drifting sensor injected. The data goes
    through the same steps as real data: site file applied and CSVs imported into a SQLite file,
    commissioning check, cycle states and virtual sensors, detection. Prints what was found per
    unit beside the injected ground truth, and where the outputs are. No broker or server needed.

    Example:

    \b
        rimewatch demo
        rimewatch demo --out /tmp/rimewatch-demo --days 7
    """
    import importlib
    import multiprocessing
    import os
    import sys

    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    from rimewatch.commands._store_common import load_site_file, open_database
    from rimewatch.physics.refrigerant import humid_air_function
    from rimewatch.site_sync import apply_site

    console = Console(highlight=False)
    if not console.is_terminal:
        console = Console(highlight=False, width=110)
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
        _remove_previous_run(out_dir)
    except OSError as error:
        raise click.ClickException(f"--out: cannot use {out_dir}: {error.strerror}") from None
    db_url = f"sqlite:///{(out_dir / DB_FILE).resolve()}"

    console.print(
        f"[bold]{SITE_NAME}[/] (an invented site): {len(DEMO_UNITS)} units, {days:g} days of "
        "one-minute data, simulated"
    )
    # one worker per core: units are simulated, then imported and analysed, side by side; on
    # Linux the libraries are imported once, before the workers are forked (CoolProp alone takes
    # seconds); elsewhere the workers start fresh ("spawn") and import them themselves
    context = multiprocessing.get_context("fork" if sys.platform == "linux" else "spawn")
    queue = context.Queue()
    if hasattr(os, "sched_getaffinity"):
        cores = len(os.sched_getaffinity(0))
    else:
        cores = os.cpu_count() or 1
    workers = max(1, min(len(DEMO_UNITS), cores))
    with Progress(
        "[progress.description]{task.description}",
        BarColumn(),
        MofNCompleteColumn(),
        TimeElapsedColumn(),
        console=console,
        transient=True,
        auto_refresh=False,  # refreshed by this thread: no thread runs while workers are forked
    ) as progress:
        task = progress.add_task("loading the libraries", total=5 * len(DEMO_UNITS) + 2)
        progress.refresh()

        def advance(done: str | None) -> None:
            if done is not None:
                progress.update(task, advance=1, description=done)
            progress.refresh()

        for module in PRELOADED_MODULES:
            importlib.import_module(module)
        humid_air_function()  # CoolProp itself (imported on first use) also before the fork
        advance("simulating")
        # leaving the block (done, failed or interrupted) terminates the workers
        with context.Pool(workers, _start_worker, (queue,)) as pool:
            # each refrigerant's tables are built once: the second R410A unit comes last
            order = sorted(DEMO_UNITS, key=lambda u: u.unit_id == "rtu-2")
            simulated = _run_jobs(
                pool,
                queue,
                [(_simulate_job, (u, days, seed + DEMO_UNITS.index(u), out_dir)) for u in order],
                advance,
            )
            by_unit = {outcome.unit.unit_id: (doc, outcome) for doc, outcome in simulated}
            documents = [by_unit[u.unit_id][0] for u in DEMO_UNITS]
            outcomes = [by_unit[u.unit_id][1] for u in DEMO_UNITS]
            site_path = write_site_file(out_dir, documents)
            (out_dir / TRUTH_FILE).write_text(
                json.dumps({o.unit.unit_id: o.truth for o in outcomes}, indent=2)
            )
            config = load_site_file(str(site_path))
            engine = open_database(db_url)
            try:
                apply_site(engine, config)
            finally:
                engine.dispose()
            advance("site applied")
            outcomes = _run_jobs(
                pool,
                queue,
                [(_pipeline_job, (o, site_path, db_url, days, out_dir)) for o in outcomes],
                advance,
            )
    _write_tables(outcomes, out_dir)
    _print_results(console, outcomes, out_dir)
