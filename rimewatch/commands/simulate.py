"""``rimewatch simulate``: invented plant data with injected faults, to a CSV or an MQTT broker."""

from __future__ import annotations

import json
import time
from datetime import UTC, datetime
from pathlib import Path

import click
import numpy as np
import pandas as pd
import yaml

from rimewatch.ingest.units import from_si
from rimewatch.sim.boundary import CLIMATES
from rimewatch.sim.equipment import EXPANSION_DEVICES, KINDS, default_unit
from rimewatch.sim.faults import FaultError, parse_fault
from rimewatch.sim.scenario import Scenario, SensorQuality, simulate_unit

# display unit per role: SI choice, inch-pound choice
POINT_UNITS = {
    "suction_pressure": ("kPa", "psig"),
    "discharge_pressure": ("kPa", "psig"),
    "liquid_pressure": ("kPa", "psig"),
    "suction_temp": ("degC", "degF"),
    "discharge_temp": ("degC", "degF"),
    "liquid_temp": ("degC", "degF"),
    "outdoor_air_temp": ("degC", "degF"),
    "condenser_leaving_air_temp": ("degC", "degF"),
    "return_air_temp": ("degC", "degF"),
    "supply_air_temp": ("degC", "degF"),
    "box_temp": ("degC", "degF"),
    "return_air_humidity": ("%RH", "%RH"),
    "compressor_power": ("kW", "kW"),
    "compressor_current": ("A", "A"),
    "compressor_status": ("on/off", "on/off"),
}


def site_document(scenario: Scenario, unit, display: str, topic_prefix: str, roles) -> dict:
    """The site description (rimewatch/site.py schema) of a simulated unit."""
    spec = unit.spec
    pick = 1 if display == "IP" else 0
    points = []
    for role in roles:
        point = {"role": role, "unit": POINT_UNITS[role][pick], "csv_column": role}
        point["mqtt_topic"] = f"{topic_prefix}/{role}"
        points.append(point)
    return {
        "site": {
            "name": scenario.site_name,
            "timezone": scenario.timezone,
            "elevation_m": scenario.elevation_m,
            "display_units": display,
        },
        "units": [
            {
                "id": scenario.unit_id,
                "name": f"Simulated {spec.kind.replace('_', ' ')} ({spec.refrigerant})",
                "kind": spec.kind,
                "refrigerant": spec.refrigerant,
                "expansion_device": spec.expansion_device,
                "nominal_capacity_kW": round(unit.nominal_capacity / 1e3, 3),
                "superheat_target_K": spec.design_superheat_K,
                "subcooling_target_K": spec.design_subcooling_K,
                "condenser_airflow_m3_s": spec.condenser_airflow_m3_s,
                "evaporator_airflow_m3_s": spec.evaporator_airflow_m3_s,
                "compressor_map": unit.compressor_map.to_dict(),
                "points": points,
            }
        ],
    }


def display_frame(readings: pd.DataFrame, display: str, atmospheric_pressure: float):
    """Readings converted from SI to the site file's units (NaN stays empty)."""
    pick = 1 if display == "IP" else 0
    out = pd.DataFrame(index=readings.index)
    for role in readings.columns:
        unit = POINT_UNITS[role][pick]
        values = readings[role].to_numpy(dtype=float)
        out[role] = np.round(from_si(values, unit, atmospheric_pressure), 4)
    return out


def _publish(frame: pd.DataFrame, broker: str, prefix: str, speed: float) -> int:
    import paho.mqtt.client as mqtt
    from paho.mqtt.enums import CallbackAPIVersion

    host, _, port = broker.rpartition(":")
    if not host or not port.isdigit():
        raise click.ClickException(f"--mqtt {broker!r}: expected host:port, e.g. localhost:1883")
    client = mqtt.Client(CallbackAPIVersion.VERSION2, client_id=f"rimewatch-sim-{time.time_ns()}")
    try:
        client.connect(host, int(port), keepalive=30)
    except OSError as error:
        raise click.ClickException(f"cannot reach the MQTT broker at {broker}: {error}") from error
    client.loop_start()
    sent = 0
    pause = 60.0 / speed if speed > 0 else 0.0
    try:
        for stamp, row in frame.iterrows():
            ts = stamp.strftime("%Y-%m-%dT%H:%M:%SZ")
            for role, value in row.items():
                if np.isfinite(value):
                    payload = json.dumps({"value": float(value), "ts": ts})
                    info = client.publish(f"{prefix}/{role}", payload, qos=1)
                    sent += 1
                    if sent % 2000 == 0:
                        info.wait_for_publish(timeout=30)
            if pause:
                time.sleep(pause)
        info.wait_for_publish(timeout=30) if sent else None
    finally:
        client.loop_stop()
        client.disconnect()
    return sent


@click.command()
@click.option("--kind", type=click.Choice(KINDS), default="rooftop_unit", show_default=True)
@click.option("--refrigerant", default=None, help="Default depends on the kind (R410A, R404A).")
@click.option("--expansion-device", type=click.Choice(EXPANSION_DEVICES), default=None)
@click.option("--capacity-kw", type=float, default=None, help="Nominal cooling capacity [kW].")
@click.option(
    "--climate", type=click.Choice(sorted(CLIMATES)), default="temperate", show_default=True
)
@click.option("--start", default="2026-07-01", show_default=True, help="First day (UTC, ISO 8601).")
@click.option("--days", type=float, default=7.0, show_default=True)
@click.option("--seed", type=int, default=1, show_default=True)
@click.option(
    "--fault", "faults", multiple=True, help="code:severity=..:onset=..:ramp=..; repeatable."
)
@click.option("--display-units", type=click.Choice(["SI", "IP"]), default="SI", show_default=True)
@click.option("--clean", is_flag=True, help="No sensor noise, offsets, gaps or garbage values.")
@click.option("--site-name", default="Harbourside Depot", show_default=True)
@click.option("--unit-id", default="rtu-1", show_default=True)
@click.option("--timezone", default="Europe/Berlin", show_default=True)
@click.option("--elevation", "elevation_m", type=float, default=0.0, show_default=True)
@click.option(
    "--out", "out_dir", type=click.Path(file_okay=False), default="sim-out", show_default=True
)
@click.option(
    "--mqtt", "broker", default=None, help="Publish to host:port instead of only writing files."
)
@click.option(
    "--speed",
    type=float,
    default=1.0,
    show_default=True,
    help="With --mqtt: simulated minutes per real minute (600 = 10 min/s; 0 = no pause).",
)
@click.option("--truth-states", is_flag=True, help="Also write the per-minute true states (CSV).")
def simulate(kind, refrigerant, expansion_device, capacity_kw, climate, start, days, seed, faults,
             display_units, clean, site_name, unit_id, timezone, elevation_m, out_dir, broker,
             speed, truth_states):  # fmt: skip
    """Simulate one air-cooled unit minute by minute, with optional injected faults.

    Writes OUT/<unit-id>.csv (one column per point role, units as in the site file),
    OUT/site.yaml (a site description for `rimewatch` ingest) and OUT/ground_truth.json (each
    fault's code, severity, onset and ramp, and the daily capacity and COP loss against the same
    minutes fault-free). With --mqtt the readings are also published, one JSON message
    {"value": v, "ts": "..."} per point and minute, to <site>/<unit-id>/<role> topics.

    The data is invented: an idealised model of an ordinary unit in an invented climate. It is
    for trying rimewatch out, not for judging real equipment.

    Example:

    \b
        rimewatch simulate --days 14 --seed 7 \\
            --fault low_charge:severity=0.25:onset=2026-07-03:ramp=3d --out demo-data
        rimewatch simulate --kind split_system --days 1 --mqtt localhost:1883 --speed 600
    """
    try:
        start_time = pd.Timestamp(start)
    except ValueError as error:
        raise click.ClickException(f"--start {start!r} is not an ISO 8601 date") from error
    start_time = start_time.tz_localize("UTC") if start_time.tzinfo is None else start_time
    start_dt: datetime = start_time.tz_convert(UTC).to_pydatetime()
    if not 0 < days <= 3660:
        raise click.ClickException("--days must be between 0 and 3660")
    try:
        spec = default_unit(kind, refrigerant, expansion_device, capacity_kw)
        fault_specs = tuple(parse_fault(text, default_onset=start_dt) for text in faults)
        scenario = Scenario(
            unit=spec, start=start_dt, days=days, climate=climate, seed=seed, faults=fault_specs,
            sensors=SensorQuality(False, False, 0.0, 0.0, 0.0) if clean else SensorQuality(),
            site_name=site_name, unit_id=unit_id, timezone=timezone, elevation_m=elevation_m,
        )  # fmt: skip
        readings, truth = simulate_unit(scenario)
    except (FaultError, ValueError) as error:
        raise click.ClickException(str(error)) from error

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    frame = display_frame(readings, display_units, scenario.atmospheric_pressure)
    csv_path = out / f"{unit_id}.csv"
    frame.index = frame.index.strftime("%Y-%m-%dT%H:%M:%SZ")
    frame.index.name = "timestamp"
    frame.to_csv(csv_path)
    prefix = f"{_slug(site_name)}/{unit_id}"
    document = site_document(scenario, truth.unit, display_units, prefix, list(readings.columns))
    (out / "site.yaml").write_text(
        "# Simulated by `rimewatch simulate` - invented site and data.\n"
        + yaml.safe_dump(document, sort_keys=False)
    )
    summary = truth.summary()
    if truth_states:
        truth.states.to_csv(out / f"{unit_id}-truth.csv", index_label="timestamp")
        summary["truth_states_csv"] = f"{unit_id}-truth.csv"
    (out / "ground_truth.json").write_text(json.dumps(summary, indent=2))
    click.echo(
        f"simulated {summary['minutes']} minutes ({summary['running_minutes']} running, "
        f"{summary['non_converged_minutes']} not converged) -> {csv_path}, {out / 'site.yaml'}, "
        f"{out / 'ground_truth.json'}"
    )
    if broker:
        published = _publish(display_frame(readings, display_units, scenario.atmospheric_pressure),
                             broker, prefix, speed)  # fmt: skip
        click.echo(f"published {published} readings to {broker} under {prefix}/")


def _slug(text: str) -> str:
    return "".join(c if c.isalnum() else "-" for c in text.lower()).strip("-")
