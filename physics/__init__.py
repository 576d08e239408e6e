"""Refrigeration-cycle physics: refrigerant properties, cycle reconstruction, virtual sensors.

Pure functions over numpy arrays and pandas objects, SI units throughout (Pa absolute, K, J/kg).
The names below load on first use, so importing the package (for example to validate a
refrigerant designation through :mod:`rimewatch.physics.catalogue`) does not import CoolProp.
"""

import importlib

_EXPORTS = {
    "SUPPORTED": "catalogue",
    "Refrigerant": "catalogue",
    "UnsupportedRefrigerantError": "catalogue",
    "get_refrigerant": "catalogue",
    "critical_point": "refrigerant",
    "density": "refrigerant",
    "enthalpy": "refrigerant",
    "entropy": "refrigerant",
    "isentropic_state": "refrigerant",
    "latent_heat": "refrigerant",
    "quality": "refrigerant",
    "saturated_enthalpy": "refrigerant",
    "saturated_entropy": "refrigerant",
    "saturation_pressure": "refrigerant",
    "saturation_temperature": "refrigerant",
    "triple_point": "refrigerant",
    "cycle_states": "cycle",
    "CYCLE_COLUMNS": "cycle",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name: str):
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'rimewatch.physics' has no attribute {name!r}")
    attribute = "COLUMNS" if name == "CYCLE_COLUMNS" else name
    return getattr(importlib.import_module(f"rimewatch.physics.{module}"), attribute)
