"""Wet-bulb temperature from CoolProp's humid-air functions."""

from __future__ import annotations

import numpy as np
import pytest

from rimewatch.physics.psychrometrics import wet_bulb_temperature


def test_rating_point_wet_bulb():
    # AHRI 210/240 test "A" indoor air: 80 F dry bulb, 67 F wet bulb (26.67 / 19.44 degC) at about
    # 51 %RH, sea level (ASHRAE Handbook - Fundamentals psychrometric chart; from memory).
    assert wet_bulb_temperature(299.82, 0.511) - 273.15 == pytest.approx(19.44, abs=0.1)


def test_saturated_air_wet_bulb_equals_dry_bulb():
    # Physical law: at 100 %RH the air cannot cool by evaporation.
    assert wet_bulb_temperature(293.15, 1.0) == pytest.approx(293.15, abs=0.01)


def test_arrays_nan_and_out_of_range():
    out = wet_bulb_temperature(np.array([299.82, np.nan, 303.15, 1e9]), [0.511, 0.5, 1.5, 0.5])
    assert out[0] == pytest.approx(19.44 + 273.15, abs=0.1)
    assert np.isnan(out[1:]).all()


def test_wet_bulb_below_dry_bulb_and_lower_at_altitude():
    # Lower pressure, same RH: more evaporative cooling, lower wet bulb (psychrometric charts for
    # altitude; from memory the effect is a few tenths of a kelvin at 1500 m).
    sea = wet_bulb_temperature(308.15, 0.3)
    high = wet_bulb_temperature(308.15, 0.3, pressure=84556.0)  # ISO 2533 at 1500 m
    assert high < sea < 308.15
