"""Moist-air properties detection needs beyond the virtual sensors: the wet-bulb temperature.

Computed with CoolProp's humid-air functions (``HAPropsSI``, after ASHRAE RP-1485: Herrmann, S.,
Kretzschmar, H.-J., Gatley, D. P. (2009) "Thermodynamic properties of real moist air, dry air,
steam, water, and ice"), never with hand-written psychrometric formulas.
"""

from __future__ import annotations

import numpy as np

from rimewatch.physics.refrigerant import humid_air_function

STANDARD_PRESSURE = 101325.0  # Pa
#: validity ranges passed to HAPropsSI (dry bulb [K], relative humidity [-])
TEMPERATURE_RANGE_K = (213.15, 373.15)
HUMIDITY_RANGE = (0.0, 1.0)


def wet_bulb_temperature(temp_air, relative_humidity, pressure=STANDARD_PRESSURE):
    """Thermodynamic wet-bulb temperature [K] of moist air.

    Parameters
    ----------
    temp_air : numeric or array-like
        Dry-bulb temperature [K].
    relative_humidity : numeric or array-like
        Relative humidity [0-1].
    pressure : float
        Total (atmospheric) pressure [Pa].

    Returns
    -------
    float or ndarray
        Wet-bulb temperature [K]; NaN where an input is missing or outside
        ``TEMPERATURE_RANGE_K`` / ``HUMIDITY_RANGE``.
    """
    t = np.asarray(temp_air, dtype=float)
    rh = np.asarray(relative_humidity, dtype=float)
    t, rh = np.broadcast_arrays(t, rh)
    out = np.full(t.shape, np.nan)
    valid = (
        np.isfinite(t)
        & np.isfinite(rh)
        & (t >= TEMPERATURE_RANGE_K[0])
        & (t <= TEMPERATURE_RANGE_K[1])
        & (rh >= HUMIDITY_RANGE[0])
        & (rh <= HUMIDITY_RANGE[1])
    )
    if valid.any():
        HAPropsSI = humid_air_function()
        try:
            out[valid] = HAPropsSI("B", "T", t[valid], "R", rh[valid], "P", float(pressure))
        except ValueError:  # one sample CoolProp cannot solve: go sample by sample
            for index in np.flatnonzero(valid.ravel()):
                try:
                    value = HAPropsSI(
                        "B", "T", t.flat[index], "R", rh.flat[index], "P", float(pressure)
                    )
                except ValueError:
                    value = np.nan
                out.flat[index] = value
    return float(out) if out.ndim == 0 else out
