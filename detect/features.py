"""Per-minute features of a running unit: the cycle, the air side and the virtual sensors.

Columns (SI; NaN where a reading is missing):

==========================  ====  ==========================================================
t_evap, t_cond              K     evaporating / condensing dew points from the pressures
superheat, subcooling       K     suction superheat, liquid subcooling (cycle_states)
discharge_temp              K     measured compressor discharge temperature
liquid_temp                 K     measured liquid-line temperature
condensing_approach         K     t_cond - outdoor_air_temp
liquid_approach             K     liquid_temp - outdoor_air_temp
evaporator_air_drop         K     return (or box) air - supply air temperature
condenser_air_rise          K     condenser leaving - entering air temperature
volumetric_efficiency_ratio  -    energy-balance / map mass flow (needs power and a map)
condenser_airflow_ratio     -     virtual condenser airflow / design airflow
evaporator_airflow_ratio    -     virtual evaporator airflow / design airflow
liquid_line_drop            Pa    discharge - liquid pressure (needs a liquid pressure point)
cooling_capacity            W     map mass flow x refrigerating effect (x the volumetric-
                                  efficiency ratio where known: a leaking compressor pumps less)
compressor_power            W     measured, else the map's
cop                         -     cooling_capacity / compressor_power
==========================  ====  ==========================================================

Below ``MIN_SUPERHEAT_FOR_ENTHALPY_K`` of superheat the suction state (h1) is unknown (liquid may
be present), so the enthalpy-based features of ``ENTHALPY_FEATURES`` are left NaN there.

Driving conditions beside them: outdoor_air_temp, return_air_temp (box_temp for cold rooms),
return_air_humidity, compressor_speed.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from rimewatch.detect.unit import UnitInfo
from rimewatch.physics import virtual_sensors as vs
from rimewatch.physics.cycle import cycle_arrays

MIN_SUPERHEAT_FOR_ENTHALPY_K = 1.0
ENTHALPY_FEATURES = (
    "volumetric_efficiency_ratio",
    "condenser_airflow_ratio",
    "evaporator_airflow_ratio",
    "cooling_capacity",
    "cop",
)
DRIVERS = ("outdoor_air_temp", "return_air_temp", "return_air_humidity", "compressor_speed")
FEATURES = (
    "t_evap",
    "t_cond",
    "superheat",
    "subcooling",
    "discharge_temp",
    "liquid_temp",
    "condensing_approach",
    "liquid_approach",
    "evaporator_air_drop",
    "condenser_air_rise",
    "volumetric_efficiency_ratio",
    "condenser_airflow_ratio",
    "evaporator_airflow_ratio",
    "liquid_line_drop",
    "cooling_capacity",
    "compressor_power",
    "cop",
)


def unit_features(grid: pd.DataFrame, unit: UnitInfo, rows: pd.Series) -> pd.DataFrame:
    """Features and driving conditions for the samples selected by ``rows`` (boolean Series).

    Parameters
    ----------
    grid : one-minute frame of readings (SI) from :func:`rimewatch.detect.steady.align`.
    unit : the unit's description.
    rows : which samples to compute (usually the running ones).
    """
    selected = rows.to_numpy(dtype=bool)
    index = grid.index[selected]
    sub = columns_of(grid, selected)
    if not len(index) or not sub or _present(sub, "suction_pressure") is None:
        nan = np.full(len(index), np.nan)
        return _frame(dict.fromkeys((*FEATURES, *DRIVERS), nan), index)
    states, _ = cycle_arrays(
        unit.refrigerant,
        sub["suction_pressure"],
        sub.get("discharge_pressure", np.nan),
        suction_temp=_present(sub, "suction_temp"),
        liquid_temp=_present(sub, "liquid_temp"),
        discharge_temp=_present(sub, "discharge_temp"),
    )  # subcooling at the condenser outlet, where the liquid temperature is read; the liquid
    # pressure (at the expansion device, after any restriction) feeds liquid_line_drop only
    out = {name: states[name] for name in ("t_evap", "t_cond", "superheat", "subcooling")}
    nan = np.full(len(index), np.nan)

    def reading(name: str) -> np.ndarray:
        return sub.get(name, nan)

    for name in ("discharge_temp", "liquid_temp", *DRIVERS):
        out[name] = reading(name)
    zone = reading("return_air_temp")
    if "box_temp" in sub:
        zone = np.where(np.isnan(zone), sub["box_temp"], zone)
        out["return_air_temp"] = zone
    outdoor = out["outdoor_air_temp"]
    out["condensing_approach"] = out["t_cond"] - outdoor
    out["liquid_approach"] = out["liquid_temp"] - outdoor
    supply = reading("supply_air_temp")
    out["evaporator_air_drop"] = zone - supply
    leaving = reading("condenser_leaving_air_temp")
    out["condenser_air_rise"] = leaving - outdoor
    if "liquid_pressure" in sub and "discharge_pressure" in sub:
        out["liquid_line_drop"] = sub["discharge_pressure"] - sub["liquid_pressure"]
    else:
        out["liquid_line_drop"] = nan

    air = vs.AirReadings(
        return_air_temp=zone,
        return_air_humidity=_present(sub, "return_air_humidity"),
        supply_air_temp=supply,
        outdoor_air_temp=outdoor,
        condenser_leaving_air_temp=leaving,
        pressure=unit.atmospheric_pressure,
    )
    virtual, _ = vs.compute_arrays(
        states,
        sub["suction_pressure"],
        compressor_map=unit.compressor_map,
        compressor_power=_present(sub, "compressor_power"),
        compressor_speed=_present(sub, "compressor_speed"),
        air=air if air.return_air_humidity is not None else _dry_air(air),
        air_tables=True,  # 0.2 % of HAPropsSI, ~50x faster for a unit-day's few hundred samples
    )
    # the map assumes a sound compressor: scale its capacity by the measured pumping share
    ratio = virtual["volumetric_efficiency_ratio"]
    capacity = virtual["cooling_capacity"]
    out["volumetric_efficiency_ratio"] = ratio
    out["cooling_capacity"] = np.where(np.isfinite(ratio), capacity * ratio, capacity)
    out["compressor_power"] = virtual["compressor_power"]
    out["cop"] = virtual["cop"]
    out["condenser_airflow_ratio"] = _ratio(
        virtual["virtual_condenser_airflow"], unit.condenser_airflow_m3_s
    )
    out["evaporator_airflow_ratio"] = _ratio(
        virtual["virtual_evaporator_airflow"], unit.evaporator_airflow_m3_s
    )
    # with (nearly) no superheat the suction may carry liquid: h1, and every virtual sensor
    # built on it (energy-balance flow, capacity, heat rejection, airflows), is unknown
    wet = ~(out["superheat"] >= MIN_SUPERHEAT_FOR_ENTHALPY_K)
    for name in ENTHALPY_FEATURES:
        out[name] = np.where(wet, np.nan, out[name])
    return _frame(out, index)


def columns_of(frame: pd.DataFrame, rows=slice(None), dtype=float) -> dict[str, np.ndarray]:
    """Column name -> values of ``rows`` (a slice or boolean mask), as ``dtype``, from one
    conversion of the whole frame (no Series per column)."""
    values = frame.to_numpy(dtype=dtype).T[:, rows]
    return dict(zip(frame.columns.tolist(), values, strict=True))


def _present(columns: dict[str, np.ndarray], name: str) -> np.ndarray | None:
    """The column, None when missing or without a single reading."""
    values = columns.get(name)
    return None if values is None or np.isnan(values).all() else values


def _frame(columns: dict[str, np.ndarray], index: pd.Index) -> pd.DataFrame:
    """A float frame built from one 2-D block (one copy of the columns, no per-column work)."""
    values = np.empty((len(columns), len(index)))
    for row, column in zip(values, columns.values(), strict=True):
        row[...] = column
    return pd.DataFrame(values.T, index=index, columns=list(columns), copy=False)


def _dry_air(air: vs.AirReadings) -> vs.AirReadings:
    """Without a return humidity only the condenser side can be computed."""
    return vs.AirReadings(
        outdoor_air_temp=air.outdoor_air_temp,
        condenser_leaving_air_temp=air.condenser_leaving_air_temp,
        pressure=air.pressure,
    )


def _ratio(values: np.ndarray, design: float | None) -> np.ndarray:
    if design is None or not np.isfinite(design) or design <= 0:
        return np.full(len(values), np.nan)
    return values / design
