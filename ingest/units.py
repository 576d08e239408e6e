"""Unit conversion at the edges: readings in the units a site or a technician uses <-> SI absolute.

Inside rimewatch every quantity is SI and absolute (design.md, "Internal units"): pressure [Pa]
absolute, temperature [K], power [W], mass flow [kg/s], volume flow [m^3/s], specific enthalpy
[J/kg], specific entropy [J/(kg K)], rotational speed [Hz] (revolutions per second), relative
humidity and percentages as fractions [-], on/off status as 1.0/0.0.

Each accepted unit string is resolved once, through pint, to a linear map ``si = value * scale +
offset`` (plus the atmospheric pressure for gauge pressures) and cached, so converting an array of
a million readings is one numpy multiply-add rather than a pint call per value.

Unit strings are matched without regard to case or spaces (``"PSIG"``, ``"kpa(g)"``, ``"deg F"``).
Plain ``"psi"`` is refused as ambiguous (gauge or absolute?); ``Pa``, ``kPa``, ``bar`` and ``MPa``
without a suffix are absolute, as in SI usage: write ``bar(g)`` for a gauge reading.

References
----------
.. [1] Thompson, A., Taylor, B. N. (2008). "Guide for the Use of the International System of Units
   (SI)." NIST Special Publication 811, Appendix B (conversion factors).
.. [2] ISO 2533:1975, "Standard Atmosphere" (identical to the ICAO standard atmosphere up to 32 km).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import cache

import numpy as np

STANDARD_ATMOSPHERE_PA = 101325.0

# kind -> the SI unit to_si returns for it
SI_UNITS: dict[str, str] = {
    "pressure": "Pa",
    "temperature": "K",
    "temperature_difference": "K",
    "power": "W",
    "current": "A",
    "fraction": "1",
    "frequency": "Hz",
    "status": "1",
    "mass_flow": "kg/s",
    "volume_flow": "m3/s",
    "specific_enthalpy": "J/kg",
    "specific_entropy": "J/(kg K)",
    "length": "m",
}

_PINT_SI = {
    "pressure": "pascal",
    "temperature": "kelvin",
    "temperature_difference": "kelvin",
    "power": "watt",
    "current": "ampere",
    "fraction": "dimensionless",
    "frequency": "turn / second",
    "mass_flow": "kilogram / second",
    "volume_flow": "meter ** 3 / second",
    "specific_enthalpy": "joule / kilogram",
    "specific_entropy": "joule / kilogram / kelvin",
    "length": "meter",
}


@dataclass(frozen=True)
class _UnitDefinition:
    kind: str
    pint_expression: str | None  # None for on/off status (no physical unit)
    gauge: bool = False


# Canonical spelling -> definition. Gauge pressures add the atmospheric pressure after scaling.
_DEFINITIONS: dict[str, _UnitDefinition] = {
    "Pa": _UnitDefinition("pressure", "pascal"),
    "kPa": _UnitDefinition("pressure", "kilopascal"),
    "bar": _UnitDefinition("pressure", "bar"),
    "MPa": _UnitDefinition("pressure", "megapascal"),
    "psia": _UnitDefinition("pressure", "psi"),
    "kPa(g)": _UnitDefinition("pressure", "kilopascal", gauge=True),
    "bar(g)": _UnitDefinition("pressure", "bar", gauge=True),
    "MPa(g)": _UnitDefinition("pressure", "megapascal", gauge=True),
    "psig": _UnitDefinition("pressure", "psi", gauge=True),
    "K": _UnitDefinition("temperature", "kelvin"),
    "degC": _UnitDefinition("temperature", "degree_Celsius"),
    "degF": _UnitDefinition("temperature", "degree_Fahrenheit"),
    "delta_degC": _UnitDefinition("temperature_difference", "delta_degree_Celsius"),
    "delta_degF": _UnitDefinition("temperature_difference", "delta_degree_Fahrenheit"),
    "W": _UnitDefinition("power", "watt"),
    "kW": _UnitDefinition("power", "kilowatt"),
    "Btu/h": _UnitDefinition("power", "Btu_it / hour"),
    "MBH": _UnitDefinition("power", "kiloBtu_it / hour"),
    "tons": _UnitDefinition("power", "refrigeration_ton"),
    "A": _UnitDefinition("current", "ampere"),
    "%RH": _UnitDefinition("fraction", "percent"),
    "%": _UnitDefinition("fraction", "percent"),
    "Hz": _UnitDefinition("frequency", "turn / second"),
    "rpm": _UnitDefinition("frequency", "turn / minute"),
    "on/off": _UnitDefinition("status", None),
    "kg/s": _UnitDefinition("mass_flow", "kilogram / second"),
    "kg/h": _UnitDefinition("mass_flow", "kilogram / hour"),
    "lb/h": _UnitDefinition("mass_flow", "pound / hour"),
    "lb/min": _UnitDefinition("mass_flow", "pound / minute"),
    "m3/s": _UnitDefinition("volume_flow", "meter ** 3 / second"),
    "m3/h": _UnitDefinition("volume_flow", "meter ** 3 / hour"),
    "L/s": _UnitDefinition("volume_flow", "liter / second"),
    "cfm": _UnitDefinition("volume_flow", "foot ** 3 / minute"),
    "gpm": _UnitDefinition("volume_flow", "gallon / minute"),
    "J/kg": _UnitDefinition("specific_enthalpy", "joule / kilogram"),
    "kJ/kg": _UnitDefinition("specific_enthalpy", "kilojoule / kilogram"),
    "Btu/lb": _UnitDefinition("specific_enthalpy", "Btu_it / pound"),
    "J/(kg K)": _UnitDefinition("specific_entropy", "joule / kilogram / kelvin"),
    "kJ/(kg K)": _UnitDefinition("specific_entropy", "kilojoule / kilogram / kelvin"),
    "Btu/(lb R)": _UnitDefinition("specific_entropy", "Btu_it / pound / delta_degree_Fahrenheit"),
    "m": _UnitDefinition("length", "meter"),
    "ft": _UnitDefinition("length", "foot"),
}

# Other spellings people write -> canonical spelling (matched after _key()).
_ALIASES: dict[str, str] = {
    "psi(a)": "psia",
    "psi(g)": "psig",
    "pa(a)": "Pa",
    "kpa(a)": "kPa",
    "kpaa": "kPa",
    "kpag": "kPa(g)",
    "bar(a)": "bar",
    "bara": "bar",
    "barg": "bar(g)",
    "mpa(a)": "MPa",
    "mpag": "MPa(g)",
    "kelvin": "K",
    "°c": "degC",
    "ºc": "degC",
    "c": "degC",
    "celsius": "degC",
    "degreesc": "degC",
    "°f": "degF",
    "ºf": "degF",
    "f": "degF",
    "fahrenheit": "degF",
    "degreesf": "degF",
    "Δk": "K",
    "deltak": "K",
    "Δ°c": "delta_degC",
    "Δdegc": "delta_degC",
    "Δ°f": "delta_degF",
    "Δdegf": "delta_degF",
    "btuh": "Btu/h",
    "btu/hr": "Btu/h",
    "ton": "tons",
    "tr": "tons",
    "amp": "A",
    "amps": "A",
    "rh": "%RH",
    "percent": "%",
    "rev/min": "rpm",
    "onoff": "on/off",
    "bool": "on/off",
    "boolean": "on/off",
    "kg/hr": "kg/h",
    "lb/hr": "lb/h",
    "m^3/s": "m3/s",
    "m³/s": "m3/s",
    "m^3/h": "m3/h",
    "m³/h": "m3/h",
    "l/s": "L/s",
    "btu/(lbf)": "Btu/(lb R)",
    "btu/(lbdegf)": "Btu/(lb R)",
    "btu/(lb°f)": "Btu/(lb R)",
    "btu/lb/r": "Btu/(lb R)",
    "meter": "m",
    "metre": "m",
    "feet": "ft",
}

_AMBIGUOUS = {"psi": "'psi' is ambiguous: write psig (gauge) or psia (absolute)"}

_STATUS_WORDS = {
    "on": 1.0,
    "off": 0.0,
    "true": 1.0,
    "false": 0.0,
    "running": 1.0,
    "stopped": 0.0,
    "run": 1.0,
    "stop": 0.0,
    "yes": 1.0,
    "no": 0.0,
    "1": 1.0,
    "0": 0.0,
}


class UnitError(ValueError):
    """An unknown, ambiguous or unsuitable unit string; the message lists the accepted ones."""


def _key(unit: str) -> str:
    return re.sub(r"[\s·*]", "", unit).lower()


_LOOKUP: dict[str, str] = {_key(name): name for name in _DEFINITIONS}
_LOOKUP.update({_key(alias): name for alias, name in _ALIASES.items()})

ACCEPTED_UNITS: tuple[str, ...] = tuple(_DEFINITIONS)


def canonical_unit(unit: str) -> str:
    """The canonical spelling of ``unit`` (``"PSIG"`` -> ``"psig"``, ``"°F"`` -> ``"degF"``).

    Raises
    ------
    UnitError
        For an unknown or ambiguous unit; the message names it and lists the accepted units.
    """
    if not isinstance(unit, str):
        raise UnitError(f"unit must be a string, not {unit!r}")
    key = _key(unit)
    if key in _AMBIGUOUS:
        raise UnitError(_AMBIGUOUS[key])
    found = _LOOKUP.get(key)
    if found is None:
        raise UnitError(f"unknown unit {unit!r}; accepted: {', '.join(ACCEPTED_UNITS)}")
    return found


def unit_kind(unit: str) -> str:
    """The physical kind of ``unit``: ``"pressure"``, ``"temperature"``, ... (keys of SI_UNITS)."""
    return _DEFINITIONS[canonical_unit(unit)].kind


def is_gauge(unit: str) -> bool:
    """True for a gauge pressure unit (psig, kPa(g), bar(g), MPa(g))."""
    return _DEFINITIONS[canonical_unit(unit)].gauge


def units_of_kind(kind: str) -> tuple[str, ...]:
    """The canonical units of one kind, e.g. ``units_of_kind("pressure")``."""
    return tuple(name for name, d in _DEFINITIONS.items() if d.kind == kind)


def temperature_difference_unit(temperature_unit: str) -> str:
    """The unit for differences of ``temperature_unit``: degF -> delta_degF, degC and K -> K."""
    unit = canonical_unit(temperature_unit)
    if _DEFINITIONS[unit].kind != "temperature":
        raise UnitError(f"{temperature_unit!r} is not a temperature unit")
    return "delta_degF" if unit == "degF" else "K"


@cache
def _registry():
    import pint  # imported on first use: import and registry take ~0.3-0.5 s

    try:  # pint's on-disk cache of parsed definitions makes later starts ~10x faster
        return pint.UnitRegistry(cache_folder=":auto:")
    except OSError:
        return pint.UnitRegistry()


@cache
def _linear_map(unit: str) -> tuple[float, float]:
    """(scale, offset) with ``si = value * scale + offset`` for a canonical unit, from pint."""
    definition = _DEFINITIONS[unit]
    if definition.pint_expression is None:
        return 1.0, 0.0
    registry = _registry()
    target = _PINT_SI[definition.kind]
    expression = definition.pint_expression
    if definition.kind == "temperature" and unit != "K":
        scale = registry.Quantity(1.0, "delta_" + expression).to(target).magnitude
        offset = registry.Quantity(0.0, expression).to(target).magnitude
        return float(scale), float(offset)
    return float(registry.Quantity(1.0, expression).to(target).magnitude), 0.0


def _status_values(values) -> np.ndarray:
    """on/off readings (words, booleans or numbers) -> 1.0 / 0.0; NaN for anything unreadable."""

    def one(value) -> float:
        if isinstance(value, str):
            word = value.strip().lower()
            if word in _STATUS_WORDS:
                return _STATUS_WORDS[word]
        try:  # numbers, also as text ("1.0", "0.0" as trend logs write binary points)
            number = float(value)
        except (TypeError, ValueError):
            return np.nan
        return number if np.isnan(number) else float(number != 0.0)

    array = np.asarray(values, dtype=object)
    return np.array([one(v) for v in array.ravel()], dtype=float).reshape(array.shape)


def _as_float_array(values) -> np.ndarray:
    try:
        return np.asarray(values, dtype=float)
    except (TypeError, ValueError) as error:
        raise ValueError(f"readings must be numbers: {error}") from None


def _result(array: np.ndarray):
    return float(array) if array.ndim == 0 else array


def to_si(values, unit: str, atmospheric_pressure: float = STANDARD_ATMOSPHERE_PA):
    """Convert readings in ``unit`` to SI absolute (see the module docstring for the SI units).

    Parameters
    ----------
    values : float or array-like
        Readings; for ``on/off`` also words (on/off, true/false, running/stopped) or booleans.
    unit : str
        Any accepted unit string (see ``ACCEPTED_UNITS`` and the aliases).
    atmospheric_pressure : float or array-like
        Added to gauge pressures [Pa]; default the ISO 2533 sea-level value 101325 Pa. Use
        :func:`atmospheric_pressure` for a site's elevation.

    Returns
    -------
    float for a scalar input, else a float ndarray of the same shape. NaN stays NaN; an
    unreadable on/off word becomes NaN.
    """
    name = canonical_unit(unit)
    definition = _DEFINITIONS[name]
    if definition.kind == "status":
        return _result(_status_values(values))
    scale, offset = _linear_map(name)
    si = _as_float_array(values) * scale + offset
    if definition.gauge:
        si = si + atmospheric_pressure
    return _result(np.asarray(si, dtype=float))


def from_si(values_si, unit: str, atmospheric_pressure: float = STANDARD_ATMOSPHERE_PA):
    """Convert SI absolute values to ``unit``; the inverse of :func:`to_si` (same arguments)."""
    name = canonical_unit(unit)
    definition = _DEFINITIONS[name]
    values = _as_float_array(values_si)
    if definition.kind == "status":
        return _result(np.asarray(values, dtype=float))
    scale, offset = _linear_map(name)
    if definition.gauge:
        values = values - atmospheric_pressure
    return _result(np.asarray((values - offset) / scale, dtype=float))


_QUANTITY = re.compile(r"^\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$")


def parse_quantity(
    text: str, default_unit: str | None = None, kind: str | None = None
) -> tuple[float, str]:
    """Split a reading such as ``"118 psig"``, ``"118psig"`` or ``"8.2 bar(g)"`` into (value, unit).

    The unit comes back in its canonical spelling (``"50 °F"`` -> ``(50.0, "degF")``). A bare
    number takes ``default_unit`` when given. With ``kind`` (e.g. ``"pressure"``) the unit must be
    of that kind, and error messages list only the units of that kind.

    Raises
    ------
    UnitError
        When the text is not a number followed by an accepted unit (of ``kind``).
    """
    match = _QUANTITY.match(text) if isinstance(text, str) else None
    if match is None:
        raise UnitError(f"cannot read {text!r} as a number with a unit, e.g. '118 psig'")
    number, unit = match.groups()
    if not unit:
        if default_unit is None:
            raise UnitError(f"{text!r} has no unit; write one, e.g. '118 psig' or '10 degC'")
        unit = default_unit
    if kind is None:
        return float(number), canonical_unit(unit)
    accepted = ", ".join(units_of_kind(kind))
    try:
        name = canonical_unit(unit)
    except UnitError as error:
        if _key(unit) in _AMBIGUOUS:
            raise
        raise UnitError(f"unknown {kind} unit {unit!r}; accepted: {accepted}") from error
    if _DEFINITIONS[name].kind != kind:
        raise UnitError(f"{unit!r} is not a {kind} unit; accepted: {accepted}")
    return float(number), name


def atmospheric_pressure(elevation_m):
    """Standard-atmosphere pressure [Pa] at ``elevation_m`` [m] above mean sea level.

    .. math:: p = 101325 \\, (1 - 2.25577 \\times 10^{-5} z)^{5.25588}

    the troposphere of the ISO 2533 / ICAO standard atmosphere [2] (15 degC and 101325 Pa at sea
    level, lapse rate 6.5 K/km). Valid from -2000 m to 11000 m; outside that range ValueError.
    """
    z = np.asarray(elevation_m, dtype=float)
    if np.any((z < -2000.0) | (z > 11000.0)):
        raise ValueError(
            f"elevation {elevation_m!r} m is outside the standard atmosphere's -2000..11000 m"
        )
    return _result(np.asarray(STANDARD_ATMOSPHERE_PA * (1.0 - 2.25577e-5 * z) ** 5.25588))
