"""Scenarios and the one-call simulator: ``simulate_unit(scenario) -> (readings, ground_truth)``.

A :class:`Scenario` names the unit, the climate, the period, the seed, the faults and how imperfect
the sensors are. :func:`simulate_unit` runs, for every minute of the period:

1. weather and zone heat gains; a coarse (every 30 minutes) solve of the unit at the zone setpoint
   to know its sensible capacity; the thermostat stepped minute by minute;
2. the quasi-steady unit model (:mod:`rimewatch.sim.model`) for all running minutes at once, with
   the faults' severity profiles, and the same minutes fault-free for the ground truth;
3. start-up transients and off-cycle equalisation (pressures relax to the saturation pressure at the
   coldest surrounding temperature, where liquid collects; pipes to their surroundings);
4. the sensors: offsets, noise, sensor faults, missing samples, outages and garbage values.

Readings come back in SI (Pa absolute, K, W, A, humidity 0-1, status 0/1), one column per point
role, indexed by UTC minute. The same scenario and seed give the same data.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from datetime import UTC, datetime

import numpy as np
import pandas as pd

from rimewatch.sim import model
from rimewatch.sim.boundary import ZoneModel, get_climate, local_hours, relax, thermostat, weather
from rimewatch.sim.equipment import UnitParameters, UnitSpec, default_unit, size_unit
from rimewatch.sim.faults import (
    FaultSpec,
    apply_refrigerant_faults,
    apply_sensor_faults,
    healthy_like,
)

COARSE_STEP_MIN = 30


@dataclass(frozen=True)
class SensorQuality:
    """How imperfect the simulated sensors are (set ``noise=False`` etc. for clean data)."""

    noise: bool = True
    offsets: bool = True
    missing_rate: float = 0.002  # share of samples lost per point, at random
    outages_per_30_days: float = 2.0  # whole-logger outages of 10 minutes to 4 hours
    garbage_rate: float = 0.0002  # share of samples replaced by a nonsense value


@dataclass(frozen=True)
class Scenario:
    """One unit over one period.

    Attributes
    ----------
    unit : what to simulate (:func:`rimewatch.sim.equipment.default_unit` gives typical ones).
    start : first minute (UTC). days : length.
    climate : a name from ``rimewatch.sim.boundary.CLIMATES``.
    seed : random seed (weather, sensors); the same seed gives the same data.
    faults : injected faults. sensors : sensor imperfections.
    site_name, unit_id, timezone, elevation_m : describe the invented site.
    """

    unit: UnitSpec = field(default_factory=default_unit)
    start: datetime = datetime(2026, 7, 1, tzinfo=UTC)
    days: float = 7.0
    climate: str = "temperate"
    seed: int = 1
    faults: tuple[FaultSpec, ...] = ()
    sensors: SensorQuality = field(default_factory=SensorQuality)
    site_name: str = "Harbourside Depot"
    unit_id: str = "rtu-1"
    timezone: str = "Europe/Berlin"
    elevation_m: float = 0.0

    def times(self) -> pd.DatetimeIndex:
        minutes = round(self.days * 1440)
        if minutes < 1:
            raise ValueError("days must cover at least one minute")
        return pd.date_range(
            pd.Timestamp(self.start).tz_convert("UTC"), periods=minutes, freq="1min"
        )

    @property
    def atmospheric_pressure(self) -> float:
        """ISO 2533 standard atmosphere at the site's elevation [Pa]."""
        return 101325.0 * (1.0 - 2.25577e-5 * self.elevation_m) ** 5.25588


@dataclass
class GroundTruth:
    """What was injected and what it did.

    ``states`` holds per minute the true (noise-free) unit states, the fault severities and the
    fault-free capacity and COP of the same minute; ``summary()`` the JSON-ready digest.
    """

    scenario: Scenario
    unit: UnitParameters
    states: pd.DataFrame
    non_converged_minutes: int

    def summary(self) -> dict:
        s = self.states
        running = s["compressor_on"] & s["converged"]
        daily = []
        for day, group in s[running].groupby(s[running].index.floor("1D")):
            capacity, healthy = group["capacity"].mean(), group["healthy_capacity"].mean()
            cop, healthy_cop = group["cop"].mean(), group["healthy_cop"].mean()
            daily.append(
                {
                    "date": day.date().isoformat(),
                    "running_minutes": len(group),
                    "capacity_loss_pct": round(100.0 * (1 - capacity / healthy), 2),
                    "cop_loss_pct": round(100.0 * (1 - cop / healthy_cop), 2),
                    "severity": {
                        f.code if f.code != "sensor_fault" else f"sensor_fault:{f.point}": round(
                            float(group[_severity_column(k)].max()), 4
                        )
                        for k, f in enumerate(self.scenario.faults)
                    },
                }
            )
        spec = self.scenario.unit
        return {
            "site": self.scenario.site_name,
            "unit": self.scenario.unit_id,
            "kind": spec.kind,
            "refrigerant": spec.refrigerant,
            "expansion_device": spec.expansion_device,
            "climate": self.scenario.climate,
            "seed": self.scenario.seed,
            "start": pd.Timestamp(self.scenario.start).isoformat(),
            "days": self.scenario.days,
            "faults": [f.to_dict() for f in self.scenario.faults],
            "minutes": len(s),
            "running_minutes": int(s["compressor_on"].sum()),
            "non_converged_minutes": self.non_converged_minutes,
            "daily": daily,
            "notes": "capacity and COP loss compare each running minute with the same minute "
            "simulated fault-free (same weather, zone temperature and compressor state)",
        }

    def to_json(self) -> str:
        return json.dumps(self.summary(), indent=2)


def _severity_column(k: int) -> str:
    return f"fault_{k}_severity"


def _coarse_sensible_capacity(unit, cond_full: model.Conditions, n: int) -> np.ndarray:
    """Sensible capacity [W] per minute from solves every ``COARSE_STEP_MIN`` minutes."""
    picks = np.arange(0, n, COARSE_STEP_MIN)
    if picks[-1] != n - 1:
        picks = np.append(picks, n - 1)
    states, converged, _ = model.solve(unit, cond_full.take(picks))
    sensible = np.where(converged, states["sensible_capacity"], np.nan)
    good = np.isfinite(sensible)
    if not good.any():
        return np.zeros(n)
    return np.interp(np.arange(n), picks[good], sensible[good])


def simulate_unit(scenario: Scenario, unit: UnitParameters | None = None):
    """Simulate the scenario; returns (readings DataFrame in SI, :class:`GroundTruth`)."""
    rng = np.random.default_rng(scenario.seed)
    climate = get_climate(scenario.climate)
    unit = unit or size_unit(scenario.unit, scenario.atmospheric_pressure)
    spec, air, tab = unit.spec, unit.air, unit.refrigerant
    times = scenario.times()
    n = len(times)

    t_out, t_dew_out = weather(times, climate, rng, scenario.timezone)
    w_out = air.humidity_ratio(t_dew_out, np.ones(n))
    hours = local_hours(times, scenario.timezone)
    weekday = np.asarray(times.tz_convert(scenario.timezone).day_of_week < 5)

    design_sensible = unit.design_state["sensible_capacity"]
    zone = ZoneModel.for_unit(spec.kind, design_sensible, spec.rating_outdoor_C + 273.15)
    gains = zone.gains(t_out, hours, weekday)
    if spec.kind == "cold_room_condensing_unit":
        zone_rh = np.full(n, 0.85)
    else:
        zone_rh = np.full(n, 0.5)
    w_set = air.humidity_ratio(np.full(n, zone.setpoint), zone_rh)
    coarse = model.Conditions.healthy(t_out, w_out, np.full(n, zone.setpoint), w_set)
    coarse = apply_refrigerant_faults(coarse, scenario.faults, times)
    sensible = _coarse_sensible_capacity(unit, coarse, n)
    on, t_zone = thermostat(zone, gains, sensible)

    # return air humidity: outdoor moisture, bounded to what the zone's own moisture balance holds
    w_zone = np.clip(
        w_out,
        air.humidity_ratio(t_zone, np.full(n, 0.3)),
        air.humidity_ratio(t_zone, zone_rh + 0.1),
    )
    if spec.kind == "cold_room_condensing_unit":
        w_zone = air.humidity_ratio(t_zone, zone_rh)
    cond = model.Conditions.healthy(t_out, w_out, t_zone, w_zone)
    faulted = apply_refrigerant_faults(cond, scenario.faults, times)

    running = np.flatnonzero(on)
    columns = (
        "t_evap", "t_cond", "p_evap", "p_discharge", "p_valve_in", "superheat", "subcooling",
        "suction_temp",
        "liquid_temp", "discharge_temp", "mass_flow", "power", "current", "capacity",
        "heat_rejection", "cop", "supply_temp", "supply_w", "condenser_leaving_air_temp",
        "sensible_capacity", "valve_opening", "valve_inlet_quality", "evaporator_outlet_quality",
        "in_map_envelope", "evaporator_air_mass_flow", "condenser_air_mass_flow",
    )  # fmt: skip
    truth = {name: np.full(n, np.nan) for name in columns}
    converged = np.zeros(n, dtype=bool)
    if running.size:
        states, ok, _ = model.solve(unit, faulted.take(running))
        for name in columns:
            truth[name][running] = states[name]
        converged[running] = ok
    healthy_capacity, healthy_cop = np.full(n, np.nan), np.full(n, np.nan)
    refrigerant_faults = [f for f in scenario.faults if f.code != "sensor_fault"]
    if running.size and refrigerant_faults:
        states, _, _ = model.solve(unit, healthy_like(faulted.take(running)))
        healthy_capacity[running], healthy_cop[running] = states["capacity"], states["cop"]
    elif running.size:
        healthy_capacity, healthy_cop = truth["capacity"].copy(), truth["cop"].copy()

    # signals the sensors see, with start-up transients and off-cycle equalisation
    coldest = np.minimum(t_out, t_zone)
    p_rest = np.exp(np.interp(coldest, tab.grid.values(), tab.ln_p))
    tau_p = 5.0 if spec.holds_superheat else 2.0
    signals = {
        "suction_pressure": relax(on, truth["p_evap"], p_rest, tau_p, 1.0),
        "discharge_pressure": relax(on, truth["p_discharge"], p_rest, tau_p, 1.5),
        # before the expansion device (design.md), so after any liquid-line restriction
        "liquid_pressure": relax(on, truth["p_valve_in"], p_rest, tau_p, 1.5),
        "suction_temp": relax(on, truth["suction_temp"], t_zone, 8.0, 3.0),
        "discharge_temp": relax(on, truth["discharge_temp"], t_out, 15.0, 4.0),
        "liquid_temp": relax(on, truth["liquid_temp"], t_out, 5.0, 2.0),
        "outdoor_air_temp": t_out.copy(),
        "condenser_leaving_air_temp": relax(
            on, truth["condenser_leaving_air_temp"], t_out, 1.0, 1.0
        ),
        "return_air_temp": t_zone.copy(),
        "supply_air_temp": relax(on, truth["supply_temp"], t_zone, 3.0, 1.5),
        "compressor_power": np.where(on, truth["power"], 0.0),
        "compressor_current": np.where(on, truth["current"], 0.0),
        "compressor_status": on.astype(float),
    }
    if spec.kind == "cold_room_condensing_unit":
        signals["box_temp"] = t_zone.copy()
    else:
        signals["return_air_humidity"] = air.relative_humidity(t_zone, w_zone)
    readings = _measure(signals, scenario, times, rng)

    states = pd.DataFrame(truth, index=times)
    states.insert(0, "compressor_on", on)
    states.insert(1, "converged", converged | ~on)
    states["zone_temp"] = t_zone
    states["outdoor_temp"] = t_out
    states["outdoor_w"] = w_out
    states["return_w"] = w_zone
    states["healthy_capacity"] = healthy_capacity
    states["healthy_cop"] = healthy_cop
    for k, fault in enumerate(scenario.faults):
        states[_severity_column(k)] = fault.profile(times)
    truth_out = GroundTruth(scenario, unit, states, int((on & ~converged).sum()))
    return readings, truth_out


def _measure(signals: dict, scenario: Scenario, times, rng: np.random.Generator) -> pd.DataFrame:
    """Sensor offsets and noise, sensor faults, missing samples, outages and garbage values."""
    quality = scenario.sensors
    n = len(times)
    readings = {}
    for role, values in signals.items():
        values = values.astype(float).copy()
        if role == "compressor_status":
            readings[role] = values
            continue
        if role.endswith("pressure"):
            offset_sd, noise_sd = 4e3, 1.5e3
        elif role.endswith("humidity"):
            offset_sd, noise_sd = 0.015, 0.005
        elif role.endswith("temp"):
            offset_sd, noise_sd = 0.2, 0.08
        else:  # power, current: relative
            offset_sd, noise_sd = 0.01 * np.nanmax(np.abs(values), initial=0.0), 0.0
            values *= 1.0 + (rng.normal(0.0, 0.01, n) if quality.noise else 0.0)
        offset = rng.normal(0.0, offset_sd)
        noise = rng.normal(0.0, noise_sd, n)
        if quality.offsets:
            values = np.where(values != 0.0, values + offset, values)
        if quality.noise:
            values = values + noise
        readings[role] = values
    apply_sensor_faults(readings, scenario.faults, times, scenario.atmospheric_pressure)
    outage = np.zeros(n, dtype=bool)
    n_outages = rng.poisson(quality.outages_per_30_days * n / (30 * 1440))
    for _ in range(n_outages):
        start, length = rng.integers(0, n), rng.integers(10, 240)
        outage[start : start + length] = True
    garbage_values = np.array([-999.0, 0.0, 32767.0, 1e9, -1e9])
    for values in readings.values():
        lost = outage | (rng.random(n) < quality.missing_rate)
        values[lost] = np.nan
        junk = rng.random(n) < quality.garbage_rate
        values[junk] = rng.choice(garbage_values, junk.sum())
    return pd.DataFrame(readings, index=pd.DatetimeIndex(times, name="timestamp"))
