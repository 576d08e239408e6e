"""A physical reference compressor for the map tests (not a test module).

Mass flow = displacement x volumetric efficiency x suction density, with the clearance-volume
volumetric efficiency eta_v = 1 - c ((p_d / p_s)^(1 / n) - 1) (Stoecker, W.F., Jones, J.W. (1982)
"Refrigeration and Air Conditioning", 2nd ed., McGraw-Hill, ch. 11; from memory). Power =
mass flow x isentropic work / isentropic efficiency, with an invented smooth efficiency curve
peaking at a pressure ratio of 3. Properties from CoolProp's full equation of state.
"""

from __future__ import annotations

import numpy as np

from rimewatch.physics import refrigerant as props

REFRIGERANT = "R410A"
DISPLACEMENT = 2.0e-3  # m^3/s at the nominal speed
NOMINAL_SPEED = 60.0  # Hz
CLEARANCE = 0.04  # clearance volume ratio c [-]
POLYTROPIC_EXPONENT = 1.1  # re-expansion exponent n [-]
RATED_SUPERHEAT = 11.0  # K


def isentropic_efficiency(pressure_ratio):
    """Invented smooth curve: 0.70 at a pressure ratio of 3, about 0.53 at 9.5."""
    return 0.70 - 0.004 * (np.asarray(pressure_ratio) - 3.0) ** 2


def performance(t_suction_dew, t_discharge_dew, superheat=RATED_SUPERHEAT, speed=NOMINAL_SPEED):
    """Mass flow [kg/s] and power [W] at dew points [K], suction superheat [K] and speed [Hz]."""
    t_s = np.asarray(t_suction_dew, float)
    t_d = np.asarray(t_discharge_dew, float)
    p_s = props.saturation_pressure(REFRIGERANT, t_s, "dew")
    p_d = props.saturation_pressure(REFRIGERANT, t_d, "dew")
    t_suction = t_s + superheat
    rho = props.density(REFRIGERANT, p_s, t_suction)
    ratio = p_d / p_s
    eta_v = 1.0 - CLEARANCE * (ratio ** (1.0 / POLYTROPIC_EXPONENT) - 1.0)
    mass_flow = DISPLACEMENT * speed / NOMINAL_SPEED * eta_v * rho
    h1 = props.enthalpy(REFRIGERANT, p_s, t_suction)
    s1 = props.entropy(REFRIGERANT, p_s, t_suction)
    _, h2s = props.isentropic_state(REFRIGERANT, p_d, s1)
    power = mass_flow * (h2s - h1) / isentropic_efficiency(ratio)
    return mass_flow, power


# Datasheet grid [degC]; the envelope leaves out lifts D - S below 20 K and above 70 K, as real
# scroll envelopes cut those corners
SUCTION_GRID_C = np.arange(-20.0, 12.5, 5.0)
DISCHARGE_GRID_C = np.arange(25.0, 62.5, 5.0)


def datasheet_grid():
    """(S, D) [degC] grid points of the datasheet inside the envelope."""
    s, d = np.meshgrid(SUCTION_GRID_C, DISCHARGE_GRID_C)
    keep = ((d - s) >= 20.0) & ((d - s) <= 70.0)
    return s[keep], d[keep]
