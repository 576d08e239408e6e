"""Boundary conditions: invented climates, loads by time of day, thermostat, start/stop dynamics.

Climates are our own inventions (no weather station behind them): an annual cycle, a daily cycle
with its minimum near 05:00 and maximum near 15:00 local time, and weather fronts as a first-order
autoregressive (Ornstein-Uhlenbeck) deviation with a correlation time of about three days, drawn
from the scenario's seed. Humidity follows a dew-point depression below the day's mean temperature.

Loads: a building (rooftop unit, split system) gains heat through its envelope, from people and
equipment in working hours (08:00-18:00) and from the sun; a cold room through its walls and from
door openings and warm product in the working day. Envelope conductances and gains are sized so the
peak design-day load is about 90 % of the unit's sensible capacity.

The thermostat switches the compressor on above setpoint + half the deadband and off below
setpoint - half the deadband, with a 3-minute minimum on and off time (common practice
anti-short-cycle timer). The zone is one thermal capacitance; a heating system (not simulated) keeps
it from falling more than 3 K below the cooling setpoint.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class Climate:
    """An invented climate (temperatures in degC)."""

    name: str
    annual_mean_C: float
    annual_amplitude_K: float
    daily_amplitude_K: float
    front_sigma_K: float
    dew_point_depression_K: float


CLIMATES = {
    c.name: c
    for c in (
        Climate("temperate", 11.0, 9.0, 5.0, 3.5, 4.0),
        Climate("mediterranean", 17.0, 7.0, 6.0, 2.5, 7.0),
        Climate("hot_humid", 26.5, 3.5, 4.0, 1.5, 2.5),
        Climate("hot_dry", 24.0, 9.0, 8.0, 2.5, 16.0),
    )
}
WARMEST_DAY_OF_YEAR = 200
FRONT_CORRELATION_DAYS = 3.0
MIN_CYCLE_MINUTES = 3


def get_climate(name: str) -> Climate:
    try:
        return CLIMATES[name]
    except KeyError:
        raise ValueError(f"unknown climate {name!r}; known: {', '.join(CLIMATES)}") from None


def local_hours(times: pd.DatetimeIndex, timezone: str) -> np.ndarray:
    """Hour of the local day (0-24, fractional) at each UTC time."""
    local = times.tz_convert(timezone)
    return np.asarray(local.hour + local.minute / 60.0, float)


def weather(times: pd.DatetimeIndex, climate: Climate, rng: np.random.Generator, timezone: str):
    """Outdoor dry-bulb [K] and dew point [K] at each time."""
    day_of_year = np.asarray(times.day_of_year, float) + local_hours(times, "UTC") / 24.0
    seasonal = climate.annual_mean_C + climate.annual_amplitude_K * np.cos(
        2 * np.pi * (day_of_year - WARMEST_DAY_OF_YEAR) / 365.25
    )
    hours = local_hours(times, timezone)
    daily = climate.daily_amplitude_K * np.cos(2 * np.pi * (hours - 15.0) / 24.0)
    # fronts: AR(1) on an hourly grid, interpolated to the samples
    n_hours = int(np.ceil((times[-1] - times[0]) / pd.Timedelta("1h"))) + 2
    phi = np.exp(-1.0 / (24.0 * FRONT_CORRELATION_DAYS))
    shocks = rng.normal(0.0, climate.front_sigma_K * np.sqrt(1 - phi**2), n_hours)
    fronts = np.empty(n_hours)
    fronts[0] = rng.normal(0.0, climate.front_sigma_K)
    for k in range(1, n_hours):
        fronts[k] = phi * fronts[k - 1] + shocks[k]
    elapsed_hours = np.asarray((times - times[0]) / pd.Timedelta("1h"), float)
    front = np.interp(elapsed_hours, np.arange(n_hours), fronts)
    moisture = np.interp(elapsed_hours, np.arange(n_hours), rng.normal(0.0, 1.0, n_hours))
    dry_bulb = seasonal + daily + front
    depression = climate.dew_point_depression_K * (1.0 + 0.25 * moisture)
    dew_point = np.minimum(seasonal + front - depression, dry_bulb)
    return dry_bulb + 273.15, dew_point + 273.15


@dataclass(frozen=True)
class ZoneModel:
    """One-capacitance zone (building or cold room) served by the unit."""

    setpoint: float  # K
    deadband: float  # K
    capacitance: float  # J/K
    envelope_ua: float  # W/K
    peak_internal_gain: float  # W, working hours
    base_internal_gain: float  # W, always
    peak_solar_gain: float  # W at 13:00 local
    floor: float  # K, heating keeps the zone above this

    @classmethod
    def for_unit(cls, kind: str, sensible_capacity_W: float, design_outdoor_K: float):
        if kind == "cold_room_condensing_unit":
            setpoint = 275.15
            envelope_ua = 0.45 * sensible_capacity_W / (design_outdoor_K - setpoint)
            return cls(
                setpoint,
                2.0,
                400.0 * sensible_capacity_W,
                envelope_ua,
                0.3 * sensible_capacity_W,
                0.05 * sensible_capacity_W,
                0.0,
                setpoint - 3.0,
            )
        setpoint = 297.15
        envelope_ua = 0.35 * sensible_capacity_W / (design_outdoor_K - setpoint)
        return cls(
            setpoint,
            1.0,
            200.0 * sensible_capacity_W,
            envelope_ua,
            0.35 * sensible_capacity_W,
            0.05 * sensible_capacity_W,
            0.2 * sensible_capacity_W,
            setpoint - 3.0,
        )

    def gains(self, outdoor_K: np.ndarray, hours: np.ndarray, weekday: np.ndarray) -> np.ndarray:
        """Heat gains [W] with the zone at its setpoint (envelope, internal, solar)."""
        working = (hours >= 8.0) & (hours < 18.0) & weekday
        solar = (
            self.peak_solar_gain * np.clip(np.cos(2 * np.pi * (hours - 13.0) / 24.0), 0, None) ** 2
        )
        return (
            self.envelope_ua * (outdoor_K - self.setpoint)
            + self.base_internal_gain
            + np.where(working, self.peak_internal_gain, 0.0)
            + solar
        )


def thermostat(zone: ZoneModel, gains_W: np.ndarray, capacity_W: np.ndarray, start_tau_min=1.5):
    """Step the zone minute by minute; returns (compressor on [bool], zone temperature [K]).

    ``gains_W`` are the heat gains at the setpoint, ``capacity_W`` the unit's steady sensible
    capacity per minute; after each start the capacity builds up as 1 - exp(-t/tau).
    """
    n = len(gains_W)
    on = np.zeros(n, dtype=bool)
    temperature = np.empty(n)
    t = zone.setpoint
    running, minutes_in_state = False, MIN_CYCLE_MINUTES
    upper, lower = zone.setpoint + zone.deadband / 2, zone.setpoint - zone.deadband / 2
    ua, cap, floor, setpoint = zone.envelope_ua, zone.capacitance, zone.floor, zone.setpoint
    ramp = [1.0 - np.exp(-(k + 1) / start_tau_min) for k in range(30)]
    gains = gains_W.tolist()
    capacity = np.nan_to_num(capacity_W).tolist()
    for k in range(n):
        if minutes_in_state >= MIN_CYCLE_MINUTES:
            if not running and t > upper:
                running, minutes_in_state = True, 0
            elif running and t < lower:
                running, minutes_in_state = False, 0
        removed = 0.0
        if running:
            removed = capacity[k] * (ramp[minutes_in_state] if minutes_in_state < 30 else 1.0)
        net = gains[k] - ua * (t - setpoint) - removed
        t = max(t + 60.0 * net / cap, floor)
        on[k] = running
        temperature[k] = t
        minutes_in_state += 1
    return on, temperature


def relax(on: np.ndarray, steady: np.ndarray, resting: np.ndarray, tau_off: float, tau_on: float):
    """A signal that relaxes to ``resting`` while off and to ``steady`` after each start.

    Off: resting + (value at the last running minute - resting) exp(-t/tau_off).
    On: steady + (value at the start - steady) exp(-t/tau_on), t in minutes since the switch.
    """
    n = len(on)
    index = np.arange(n)
    last_on = np.maximum.accumulate(np.where(on, index, -1))
    since_on = index - last_on
    at_stop = np.where(last_on >= 0, steady[np.maximum(last_on, 0)], resting)
    off_value = resting + (at_stop - resting) * np.exp(-since_on / tau_off)
    last_off = np.maximum.accumulate(np.where(~on, index, -1))
    since_start = index - last_off
    at_start = np.where(last_off >= 0, off_value[np.maximum(last_off, 0)], steady)
    on_value = steady + (at_start - steady) * np.exp(-since_start / tau_on)
    return np.where(on, on_value, off_value)
