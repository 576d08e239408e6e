"""Synthetic air-cooled units for the commissioning tests: cycles from CoolProp, then wiring faults.

Each day the compressor runs in the afternoon and stands still at night. Running states follow the
standard cycle (Stoecker 1998, ch. 1): evaporating dew point from the return air, condensing dew
point a fixed approach above outdoor air, superheat and subcooling as set, discharge from an
isentropic efficiency of 0.7. Standstill states: every pressure at the bubble-point pressure of the
outdoor temperature, every pipe at that temperature. Sensor noise is Gaussian (0.2 K, 3 kPa).
"""

from __future__ import annotations

import CoolProp.CoolProp as CP
import numpy as np
import pandas as pd

from rimewatch.physics import refrigerant as props

ATM = 101325.0


def synthetic_unit(
    refrigerant: str = "R410A",
    *,
    days: int = 1,
    interval_s: float = 120.0,
    running_hours: tuple[float, float] = (9.0, 21.0),
    approach_K: float = 12.0,
    evaporator_approach_K: float = 14.0,
    superheat_K: float = 7.0,
    subcooling_K: float = 5.0,
    efficiency: float = 0.7,
    seed: int = 1,
) -> pd.DataFrame:
    """A unit's readings by role, SI (Pa absolute, K), indexed by UTC time."""
    fluid = props.get_refrigerant(refrigerant)
    rng = np.random.default_rng(seed)
    index = pd.date_range(
        "2025-06-01", periods=int(days * 86400 / interval_s), freq=f"{interval_s}s", tz="UTC"
    )
    hour = (index.hour + index.minute / 60).to_numpy()
    outdoor = 273.15 + 24 + 7 * np.sin((hour - 9) / 24 * 2 * np.pi)
    running = (hour >= running_hours[0]) & (hour < running_hours[1])
    return_air = np.full(len(index), 273.15 + 25.0)
    t_evap = return_air - evaporator_approach_K
    t_cond = outdoor + approach_K
    p_suc = props.saturation_pressure(fluid, t_evap, "dew")
    p_dis = props.saturation_pressure(fluid, t_cond, "dew")
    t_suc = t_evap + superheat_K
    t_liq = props.saturation_temperature(fluid, p_dis, "bubble") - subcooling_K
    h1 = props.enthalpy(fluid, p_suc, t_suc)
    s1 = props.entropy(fluid, p_suc, t_suc)
    h2s = props.isentropic_state(fluid, p_dis, s1)[1]
    h2 = h1 + (h2s - h1) / efficiency
    t_dis = CP.PropsSI("T", "P", p_dis, "H", h2, fluid.coolprop_name)
    p_still = props.saturation_pressure(fluid, outdoor, "bubble")
    frame = pd.DataFrame(
        {
            "suction_pressure": np.where(running, p_suc, p_still),
            "discharge_pressure": np.where(running, p_dis, p_still),
            "liquid_pressure": np.where(running, p_dis - 30e3, p_still),
            "suction_temp": np.where(running, t_suc, outdoor),
            "discharge_temp": np.where(running, t_dis, outdoor),
            "liquid_temp": np.where(running, t_liq, outdoor),
            "outdoor_air_temp": outdoor,
            "return_air_temp": return_air,
            "compressor_status": running.astype(float),
        },
        index=index,
    )
    for column in frame:
        if column.endswith("_pressure"):
            frame[column] += rng.normal(0, 3e3, len(frame))
        elif column.endswith("_temp"):
            frame[column] += rng.normal(0, 0.2, len(frame))
    return frame


def swap(frame: pd.DataFrame, a: str, b: str) -> pd.DataFrame:
    """The readings of ``a`` and ``b`` exchanged, as a wiring mistake would store them."""
    out = frame.copy()
    out[a], out[b] = frame[b].to_numpy(), frame[a].to_numpy()
    return out


def gauge_logged_as_absolute(frame: pd.DataFrame, column: str) -> pd.DataFrame:
    """A gauge transducer configured as absolute: stored one atmosphere low."""
    out = frame.copy()
    out[column] = frame[column] - ATM
    return out


def degf_logged_as_degc(frame: pd.DataFrame, column: str) -> pd.DataFrame:
    """A sensor reporting degF numbers configured as degC (stored as degF value + 273.15)."""
    out = frame.copy()
    celsius = frame[column] - 273.15
    out[column] = celsius * 1.8 + 32.0 + 273.15
    return out
