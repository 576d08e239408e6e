"""Refrigeration-cycle physics: refrigerant properties, cycle reconstruction, virtual sensors.

Pure functions over numpy arrays and pandas objects, SI units throughout (Pa absolute, K, J/kg).
"""

from rimewatch.physics.cycle import COLUMNS as CYCLE_COLUMNS
from rimewatch.physics.cycle import cycle_states
from rimewatch.physics.refrigerant import (
    SUPPORTED,
    Refrigerant,
    UnsupportedRefrigerantError,
    critical_point,
    density,
    enthalpy,
    entropy,
    get_refrigerant,
    isentropic_state,
    latent_heat,
    quality,
    saturated_enthalpy,
    saturated_entropy,
    saturation_pressure,
    saturation_temperature,
)

__all__ = [
    "CYCLE_COLUMNS",
    "SUPPORTED",
    "Refrigerant",
    "UnsupportedRefrigerantError",
    "critical_point",
    "cycle_states",
    "density",
    "enthalpy",
    "entropy",
    "get_refrigerant",
    "isentropic_state",
    "latent_heat",
    "quality",
    "saturated_enthalpy",
    "saturated_entropy",
    "saturation_pressure",
    "saturation_temperature",
]
