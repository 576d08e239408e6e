"""Sensor checks on simulated units: each kind found, and never a refrigerant fault instead."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from simulated import END, ONSET, baseline, readings, unit_info

from rimewatch.detect import quality, steady
from rimewatch.detect.diagnose import REFRIGERANT_FAULTS
from rimewatch.detect.pipeline import analyze_unit
from rimewatch.physics import refrigerant


def _analyse(frame, kind="rooftop_unit"):
    return analyze_unit(frame, unit_info(kind), baseline(kind), ONSET, END)


def _codes(analysis):
    return {(e.code, e.detail) for e in analysis.events}


def _refrigerant_events(analysis):
    return [e for e in analysis.events if e.code in REFRIGERANT_FAULTS]


def test_equalised_pressure_is_the_saturation_pressure_of_the_coldest_air():
    """The physics the drift check rests on, checked on the simulator's standstill hours:
    equalised pressure = CoolProp saturation pressure at the coldest surrounding air."""
    info = unit_info("rooftop_unit")
    grid = steady.align(readings("rooftop_unit").loc[:ONSET])
    still = steady.standstill_samples(grid)
    sub = grid[still.to_numpy()].dropna(subset=["suction_pressure", "outdoor_air_temp"])
    coldest = sub[["outdoor_air_temp", "return_air_temp"]].min(axis=1)
    expected = refrigerant.saturation_pressure(info.refrigerant, coldest.to_numpy(), "dew")
    # sensor offsets up to ~3 sigma (12 kPa) and noise: within 2.5 %
    np.testing.assert_allclose(sub["suction_pressure"].median(), np.median(expected), rtol=0.025)


def test_gauge_pressure_logged_as_absolute_is_drift_not_a_refrigerant_fault():
    frame = readings(
        "rooftop_unit", (("sensor_fault", 1.0, "suction_pressure", "gauge_as_absolute"),)
    )
    analysis = _analyse(frame)
    assert ("sensor_fault", "suction_pressure:drift") in _codes(analysis)
    assert _refrigerant_events(analysis) == []


def test_stuck_liquid_temperature_found_and_no_refrigerant_fault():
    frame = readings("rooftop_unit", (("sensor_fault", 1.0, "liquid_temp", "stuck"),))
    analysis = _analyse(frame)
    assert ("sensor_fault", "liquid_temp:stuck") in _codes(analysis)
    assert _refrigerant_events(analysis) == []


@pytest.mark.parametrize("kelvin_per_day", [1.5, 4.0])
def test_drifting_suction_temperature_found_and_no_refrigerant_fault(kelvin_per_day):
    frame = readings("rooftop_unit", (("sensor_fault", kelvin_per_day, "suction_temp", "drift"),))
    analysis = _analyse(frame)
    (event,) = [e for e in analysis.events if e.detail == "suction_temp:drift"]
    assert event.is_open  # still drifting at the end: the event must not clear
    assert _refrigerant_events(analysis) == []


def test_implausible_negative_superheat():
    """A suction sensor reading 8 K below the dew point in steady running is impossible."""
    frame = readings("rooftop_unit").copy()
    after = frame.index >= ONSET
    frame.loc[after, "suction_temp"] -= 14.0  # superheat about 6 K -> about -8 K
    analysis = _analyse(frame)
    assert ("sensor_fault", "suction_pressure/suction_temp:implausible") in _codes(analysis)
    assert _refrigerant_events(analysis) == []


def test_out_of_range_values_blanked_and_sustained_ones_found():
    frame = readings("rooftop_unit").copy()
    hour = frame.index[(frame.index >= ONSET)][:600]
    frame.loc[hour, "return_air_temp"] = 32767.0  # a controller's "no sensor" code, 10 hours
    frame.loc[frame.index[frame.index >= ONSET][700], "outdoor_air_temp"] = -999.0  # a lone one
    analysis = _analyse(frame)
    codes = _codes(analysis)
    assert ("sensor_fault", "return_air_temp:out_of_range") in codes
    assert ("sensor_fault", "outdoor_air_temp:out_of_range") not in codes
    assert _refrigerant_events(analysis) == []
    grid, blanked = quality.blank_out_of_range(steady.align(frame), unit_info("rooftop_unit"))
    assert blanked["outdoor_air_temp"].sum() == 1
    assert np.isnan(grid["return_air_temp"].loc[hour[0]])


@pytest.mark.parametrize(("hours", "expected"), [(3, False), (10, True)])
def test_offline_point_needs_six_silent_hours(hours, expected):
    frame = readings("rooftop_unit").copy()
    silent = (frame.index >= ONSET + pd.Timedelta("2h")) & (
        frame.index < ONSET + pd.Timedelta(hours=2 + hours)
    )
    frame.loc[silent, "discharge_temp"] = np.nan
    analysis = _analyse(frame)
    assert (("sensor_fault", "discharge_temp:offline") in _codes(analysis)) is expected
    assert _refrigerant_events(analysis) == []
