"""Day-one rules: what a sound unit should show before any baseline exists.

Without a fault-free history, the expectations come from the unit's design values (superheat and
subcooling targets from the site file) and the trade's rules of thumb. Every number below is
**common practice** (field service guidance for air-cooled comfort cooling, recalled from memory,
not read from one standard); they are deliberately wide: on day one rimewatch would rather miss a
mild fault than send a technician for nothing. Once a baseline is fitted
(:mod:`rimewatch.detect.reference`) its statistical bands replace these.

============================  ==============================  ==========  ===================
feature                       expectation                     band (+-)   provenance
============================  ==============================  ==========  ===================
superheat, TXV/EEV            unit target, else 6 K           4 K         common practice:
                                                                          valves set 4-8 K
superheat, fixed orifice      target-superheat chart:         4 K         common practice
                              (3 WB_in - 80 - DB_out) / 2 [F]             (the charging chart
                              clipped to 5-40 F                           formula), from memory
subcooling                    unit target, else 6 K (valves)  4 K         common practice:
                              (orifice units: target only)                10-12 F for TXV units
t_cond (condensing approach)  t_cond - outdoor = 12 K         7 K         common practice:
                                                                          15-30 F over ambient
discharge_temp                below 107 degC (225 F)          upper only  common practice
                                                                          limit at the
                                                                          discharge line
evaporator_air_drop           10 K                            4 K         common practice:
                                                                          18-22 F split at
                                                                          400 cfm/ton
============================  ==============================  ==========  ===================

The indoor wet bulb for the orifice chart comes from return air temperature and humidity through
CoolProp's humid-air functions (:func:`rimewatch.physics.psychrometrics.wet_bulb_temperature`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from rimewatch.detect.unit import UnitInfo
from rimewatch.physics.psychrometrics import wet_bulb_temperature

DEFAULT_VALVE_SUPERHEAT_K = 6.0
DEFAULT_VALVE_SUBCOOLING_K = 6.0
SUPERHEAT_BAND_K = 4.0
SUBCOOLING_BAND_K = 4.0
CONDENSING_APPROACH_K = 12.0
CONDENSING_APPROACH_BAND_K = 7.0
DISCHARGE_LIMIT_K = 273.15 + 107.0
EVAPORATOR_AIR_DROP_K = 10.0
EVAPORATOR_AIR_DROP_BAND_K = 4.0
ORIFICE_SUPERHEAT_CLIP_F = (5.0, 40.0)
#: measurement uncertainty of an hourly median of a rule feature [K]
RULE_UNCERTAINTY_K = 0.7


def orifice_target_superheat(
    return_air_temp, return_air_humidity, outdoor_air_temp, pressure=101325.0
):
    """Target superheat [K] of a fixed-orifice unit from the trade's charging chart formula.

    Common practice (from memory): target [F] = (3 WB_indoor - 80 - DB_outdoor) / 2, both in F,
    clipped to 5-40 F. Temperatures [K], humidity [0-1], pressure [Pa].
    """
    wet_bulb = wet_bulb_temperature(return_air_temp, return_air_humidity, pressure)
    wb_f = (wet_bulb - 273.15) * 1.8 + 32.0
    db_f = (np.asarray(outdoor_air_temp, float) - 273.15) * 1.8 + 32.0
    target_f = np.clip((3.0 * wb_f - 80.0 - db_f) / 2.0, *ORIFICE_SUPERHEAT_CLIP_F)
    return target_f / 1.8


def expectations(features: pd.DataFrame, unit: UnitInfo) -> tuple[pd.DataFrame, dict]:
    """Day-one (deviation, band) per sample.

    Returns
    -------
    deviations : DataFrame, measured - expected per rule feature [K] (NaN where not judged);
        the discharge limit gives the excess over the limit where positive and NaN below it
        (a cool discharge says nothing on day one).
    bands : feature -> band [K] beyond which a deviation counts.
    """
    columns = {name: features[name].to_numpy(dtype=float) for name in features}
    deviations, bands = expectation_arrays(columns, unit)
    return pd.DataFrame(deviations, index=features.index), bands


def expectation_arrays(
    features: dict[str, np.ndarray], unit: UnitInfo
) -> tuple[dict[str, np.ndarray], dict]:
    """:func:`expectations` of samples given as feature -> array (deviations as arrays)."""
    out = {}
    bands = {}
    if unit.holds_superheat:
        target = unit.superheat_target_K or DEFAULT_VALVE_SUPERHEAT_K
        out["superheat"] = features["superheat"] - target
    elif "return_air_humidity" in features and not np.isnan(features["return_air_humidity"]).all():
        target = orifice_target_superheat(
            features["return_air_temp"],
            features["return_air_humidity"],
            features["outdoor_air_temp"],
            unit.atmospheric_pressure,
        )
        out["superheat"] = features["superheat"] - target
    bands["superheat"] = SUPERHEAT_BAND_K
    sc_target = unit.subcooling_target_K
    if sc_target is None and unit.holds_superheat:
        sc_target = DEFAULT_VALVE_SUBCOOLING_K
    if sc_target is not None:
        out["subcooling"] = features["subcooling"] - sc_target
        bands["subcooling"] = SUBCOOLING_BAND_K
    out["t_cond"] = features["condensing_approach"] - CONDENSING_APPROACH_K
    bands["t_cond"] = CONDENSING_APPROACH_BAND_K
    excess = features["discharge_temp"] - DISCHARGE_LIMIT_K
    out["discharge_temp"] = np.where(excess > 0, excess, np.nan)
    bands["discharge_temp"] = 0.0
    out["evaporator_air_drop"] = features["evaporator_air_drop"] - EVAPORATOR_AIR_DROP_K
    bands["evaporator_air_drop"] = EVAPORATOR_AIR_DROP_BAND_K
    return out, bands
