"""Cycle reconstruction: from a circuit's measured pressures and temperatures to its cycle.

State points (the numbering used throughout rimewatch):

====  ==========================================================================
1     compressor suction: suction pressure and suction temperature
2     compressor discharge: discharge pressure and discharge temperature
2s    isentropic discharge: discharge pressure and the suction entropy s1
3     liquid line before the expansion device: liquid (else discharge) pressure and
      liquid temperature
4     evaporator inlet after isenthalpic expansion: suction pressure, h4 = h3
====  ==========================================================================

Pressure drops in the heat exchangers and lines are neglected unless a liquid pressure is given.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from rimewatch.physics import fast
from rimewatch.physics import refrigerant as exact
from rimewatch.physics.refrigerant import get_refrigerant

#: Output columns of :func:`cycle_states`, their units and meaning.
COLUMNS: dict[str, tuple[str, str]] = {
    "t_evap": ("K", "evaporating temperature: dew point at the suction pressure"),
    "t_cond": ("K", "condensing temperature: dew point at the discharge pressure"),
    "t_cond_bubble": ("K", "bubble point at the liquid-line pressure (reference for subcooling)"),
    "superheat": ("K", "suction superheat, suction_temp - t_evap"),
    "subcooling": ("K", "liquid subcooling, t_cond_bubble - liquid_temp"),
    "discharge_superheat": ("K", "discharge_temp - t_cond"),
    "h1": ("J/kg", "enthalpy at compressor suction"),
    "h2": ("J/kg", "enthalpy at compressor discharge (measured discharge temperature)"),
    "h2s": ("J/kg", "enthalpy after isentropic compression to the discharge pressure"),
    "h3": ("J/kg", "enthalpy of the liquid before the expansion device"),
    "h4": ("J/kg", "enthalpy at the evaporator inlet (equal to h3: isenthalpic expansion)"),
    "s1": ("J/(kg K)", "entropy at compressor suction"),
    "rho1": ("kg/m^3", "density at compressor suction"),
    "quality_evaporator_inlet": ("-", "vapour mass fraction entering the evaporator"),
    "eta_isentropic": ("-", "compressor isentropic efficiency (h2s - h1) / (h2 - h1)"),
    "refrigerating_effect": ("J/kg", "h1 - h4, cooling per kilogram of refrigerant"),
    "compression_work": ("J/kg", "h2 - h1, work per kilogram from the enthalpy rise"),
    "heat_rejection_effect": ("J/kg", "h2 - h3, heat rejected per kilogram"),
    "cop": ("-", "coefficient of performance from enthalpies, (h1 - h4) / (h2 - h1)"),
    "cop_carnot": ("-", "Carnot COP between t_evap and t_cond, t_evap / (t_cond - t_evap)"),
    "second_law_efficiency": ("-", "cop / cop_carnot"),
    "pressure_ratio": ("-", "discharge pressure / suction pressure (absolute)"),
    "flags": ("", "reasons a sample is incomplete or implausible; empty when sound (categorical)"),
}

#: The numeric columns of :data:`COLUMNS` (all but ``flags``), in order.
VALUE_COLUMNS: tuple[str, ...] = tuple(name for name in COLUMNS if name != "flags")

# Per-sample flags: bit -> readable reason.
MISSING_SUCTION_PRESSURE = 1 << 0
MISSING_DISCHARGE_PRESSURE = 1 << 1
MISSING_SUCTION_TEMP = 1 << 2
MISSING_LIQUID_TEMP = 1 << 3
MISSING_DISCHARGE_TEMP = 1 << 4
OUTSIDE_PROPERTY_RANGE = 1 << 5
SUCTION_NOT_BELOW_DISCHARGE = 1 << 6
SUCTION_BELOW_SATURATION = 1 << 7
LIQUID_ABOVE_SATURATION = 1 << 8
DISCHARGE_BELOW_SATURATION = 1 << 9
DISCHARGE_BELOW_ISENTROPIC = 1 << 10
TRANSCRITICAL = 1 << 11
SUCTION_SUPERCRITICAL = 1 << 12
NOT_PHYSICAL = 1 << 13

FLAG_REASONS: dict[int, str] = {
    MISSING_SUCTION_PRESSURE: "suction pressure missing",
    MISSING_DISCHARGE_PRESSURE: "discharge pressure missing",
    MISSING_SUCTION_TEMP: "suction temperature missing",
    MISSING_LIQUID_TEMP: "liquid temperature missing",
    MISSING_DISCHARGE_TEMP: "discharge temperature missing",
    OUTSIDE_PROPERTY_RANGE: "pressure outside the refrigerant's property range",
    SUCTION_NOT_BELOW_DISCHARGE: "suction pressure at or above discharge pressure",
    SUCTION_BELOW_SATURATION: (
        "suction temperature below the evaporating dew point: liquid may reach the compressor"
    ),
    LIQUID_ABOVE_SATURATION: (
        "liquid warmer than the condensing bubble point: vapour in the liquid line"
    ),
    DISCHARGE_BELOW_SATURATION: "discharge temperature below the condensing dew point",
    DISCHARGE_BELOW_ISENTROPIC: (
        "discharge temperature below the isentropic discharge temperature (efficiency above 1)"
    ),
    TRANSCRITICAL: (
        "transcritical: discharge above the critical pressure, "
        "condensing temperature and subcooling do not apply"
    ),
    SUCTION_SUPERCRITICAL: "suction pressure above the critical pressure",
    NOT_PHYSICAL: (
        "absolute pressure or temperature at or below zero: not a physical reading "
        "(gauge logged as absolute, or a failed sensor)"
    ),
}


def describe_flags(bits: int) -> str:
    """The readable reasons encoded in a flag bit mask, joined by ``"; "``."""
    return "; ".join(reason for bit, reason in FLAG_REASONS.items() if bits & bit)


class _ExactLookup:
    """The interface of :class:`rimewatch.physics.fast.PressureLookup` on the exact path."""

    def __init__(self, refrigerant, pressure):
        self.refrigerant, self.p = refrigerant, pressure
        self._saturation = {"T": exact.saturation_temperature, "h": exact.saturated_enthalpy}

    def saturation(self, name: str) -> np.ndarray:
        quantity, phase = name.split("_")
        return np.asarray(self._saturation[quantity](self.refrigerant, self.p, phase))

    def single_phase(self, temperature, *names: str) -> dict[str, np.ndarray]:
        functions = {"h": exact.enthalpy, "s": exact.entropy, "rho": exact.density}
        return {n: np.asarray(functions[n](self.refrigerant, self.p, temperature)) for n in names}

    def isentropic_enthalpy(self, entropy_) -> np.ndarray:
        return np.asarray(exact.isentropic_state(self.refrigerant, self.p, entropy_)[1])


_LOOKUPS = {"fast": fast.PressureLookup, "exact": _ExactLookup}

#: Samples computed together: blocks this size keep the intermediate arrays in the CPU cache.
BLOCK_SAMPLES = 32_768


def _as_array(values, length: int) -> np.ndarray:
    array = np.asarray(values, dtype=float)
    if array.ndim == 0:
        return np.full(length, float(array))
    return array.ravel().copy()


def _first_index(values) -> pd.Index | None:
    """The first Series' index, None when no input is a Series."""
    return next((v.index for v in values if isinstance(v, pd.Series)), None)


def _length(values) -> int:
    """The samples' count (1 when every input is a scalar)."""
    lengths = [np.size(v) for v in values if v is not None and np.ndim(v) > 0]
    return max(lengths) if lengths else 1


def cycle_states(
    refrigerant,
    suction_pressure,
    discharge_pressure,
    suction_temp=None,
    liquid_temp=None,
    discharge_temp=None,
    liquid_pressure=None,
    method: str = "fast",
) -> pd.DataFrame:
    """Rebuild the vapor-compression cycle of every sample.

    Parameters
    ----------
    refrigerant : str or Refrigerant
        A supported refrigerant (see :data:`rimewatch.physics.SUPPORTED`).
    suction_pressure, discharge_pressure : numeric, array-like or Series
        Absolute pressures at compressor suction and discharge [Pa].
    suction_temp, liquid_temp, discharge_temp : numeric, array-like or Series, optional
        Temperatures at compressor suction, in the liquid line before the expansion device, and at
        compressor discharge [K]. Columns that need a missing reading come out NaN.
    liquid_pressure : numeric, array-like or Series, optional
        Absolute liquid-line pressure [Pa]; the discharge pressure stands in when omitted.
    method : {"fast", "exact"}
        ``"fast"`` uses the tables of :mod:`rimewatch.physics.fast`, ``"exact"`` CoolProp's full
        equation of state for every state (about 100 times slower).

    Returns
    -------
    pandas.DataFrame
        One row per sample with the columns of :data:`COLUMNS`, all SI (temperatures in K,
        enthalpies in J/kg). The index is that of the first Series given, else a RangeIndex.
        A sample that cannot be computed has NaN where values are missing and a readable reason
        in ``flags``; the batch itself never raises for bad samples.

    Notes
    -----
    Energy per unit mass of refrigerant, with an adiabatic compressor and isenthalpic expansion:

    .. math::

        q_{evap} = h_1 - h_4, \\quad w = h_2 - h_1, \\quad q_{cond} = h_2 - h_3 = q_{evap} + w,

        COP = q_{evap} / w, \\quad \\eta_s = (h_{2s} - h_1) / (h_2 - h_1),

        COP_{Carnot} = T_{evap} / (T_{cond} - T_{evap}).

    Superheat is measured from the dew point at the suction pressure and subcooling from the bubble
    point at the liquid-line pressure, as is usual for zeotropic blends (ASHRAE Handbook -
    Refrigeration, chapter on refrigerant system practices). The condensing and evaporating
    temperatures are dew points, as in AHRI Standard 540 compressor ratings.
    """
    readings = suction_pressure, discharge_pressure, suction_temp, liquid_temp, discharge_temp
    inputs = _inputs(*readings, liquid_pressure)
    values, flags = _cycle_values(refrigerant, inputs, method)
    frame = pd.DataFrame(
        values.T, index=_first_index(inputs.values()), columns=VALUE_COLUMNS, copy=False
    )
    frame["flags"] = _flag_text(flags)
    return frame


def cycle_arrays(
    refrigerant,
    suction_pressure,
    discharge_pressure,
    suction_temp=None,
    liquid_temp=None,
    discharge_temp=None,
    liquid_pressure=None,
    method: str = "fast",
) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """:func:`cycle_states` without the frame, for callers that go on with arrays.

    Returns
    -------
    columns : dict
        Column of :data:`VALUE_COLUMNS` -> values per sample, as in :func:`cycle_states`.
    flags : numpy.ndarray of int64
        The flag bits per sample (:func:`describe_flags` reads them).
    """
    readings = suction_pressure, discharge_pressure, suction_temp, liquid_temp, discharge_temp
    inputs = _inputs(*readings, liquid_pressure)
    values, flags = _cycle_values(refrigerant, inputs, method)
    return dict(zip(VALUE_COLUMNS, values, strict=True)), flags


def _inputs(p_suc, p_dis, t_suc, t_liq, t_dis, p_liq) -> dict[str, object]:
    return {
        "p_suc": p_suc,
        "p_dis": p_dis,
        "t_suc": t_suc,
        "t_liq": t_liq,
        "t_dis": t_dis,
        "p_liq": p_liq,
    }


def _cycle_values(refrigerant, inputs: dict, method: str) -> tuple[np.ndarray, np.ndarray]:
    """The cycle of every sample: values, shape (len(VALUE_COLUMNS), n), and the flag bits."""
    fluid = get_refrigerant(refrigerant)
    if method not in _LOOKUPS:
        raise ValueError(f"method must be 'fast' or 'exact', not {method!r}")
    n = _length(inputs.values())
    arrays = {name: _as_array(v, n) for name, v in inputs.items() if v is not None}
    given = frozenset(arrays)
    values = np.empty((len(VALUE_COLUMNS), n))
    flags = np.zeros(n, dtype=np.int64)
    for start in range(0, n, BLOCK_SAMPLES):
        block = slice(start, min(start + BLOCK_SAMPLES, n))
        flags[block] = _cycle_block(
            fluid,
            _LOOKUPS[method],
            {k: v[block] for k, v in arrays.items()},
            given,
            values[:, block],
        )
    return values, flags


def _cycle_block(
    fluid, lookup, arrays: dict[str, np.ndarray], given: frozenset[str], out: np.ndarray
) -> np.ndarray:
    """The cycle of one block of samples: writes the rows of ``out`` (one per column of
    :data:`VALUE_COLUMNS`) and returns the flag bits."""
    n = arrays["p_suc"].size
    p_suc, p_dis = arrays["p_suc"], arrays["p_dis"]
    nan = np.full(n, np.nan)
    t_suc, t_liq, t_dis = (arrays.get(k, nan) for k in ("t_suc", "t_liq", "t_dis"))
    p_liq = arrays.get("p_liq", p_dis)

    flags = np.zeros(n, dtype=np.int64)
    for name, bit in (
        ("p_suc", MISSING_SUCTION_PRESSURE),
        ("p_dis", MISSING_DISCHARGE_PRESSURE),
        ("t_suc", MISSING_SUCTION_TEMP),
        ("t_liq", MISSING_LIQUID_TEMP),
        ("t_dis", MISSING_DISCHARGE_TEMP),
    ):
        if name in given:
            flags[~np.isfinite(arrays[name])] |= bit
    for values in (p_suc, p_dis, t_suc, t_liq, t_dis, p_liq):
        with np.errstate(invalid="ignore"):
            not_physical = values <= 0
        flags[not_physical] |= NOT_PHYSICAL
        values[~np.isfinite(values) | not_physical] = np.nan

    p_crit = fluid.critical_pressure
    transcritical = p_dis >= p_crit
    flags[transcritical] |= TRANSCRITICAL
    flags[p_suc >= p_crit] |= SUCTION_SUPERCRITICAL
    flags[p_suc >= p_dis] |= SUCTION_NOT_BELOW_DISCHARGE

    suction = lookup(fluid, p_suc)
    discharge = lookup(fluid, p_dis)
    liquid_line = lookup(fluid, p_liq) if "p_liq" in given else discharge
    t_evap = suction.saturation("T_dew")
    t_cond = discharge.saturation("T_dew")
    t_cond_bubble = liquid_line.saturation("T_bubble")
    subcritical_pressure = (p_suc < p_crit) | (p_dis < p_crit)
    out_of_range = (np.isfinite(p_suc) & (p_suc < p_crit) & np.isnan(t_evap)) | (
        np.isfinite(p_dis) & ~transcritical & np.isnan(t_cond)
    )
    flags[out_of_range & subcritical_pressure] |= OUTSIDE_PROPERTY_RANGE

    with np.errstate(invalid="ignore"):
        superheat = t_suc - t_evap
        subcooling = t_cond_bubble - t_liq
        discharge_superheat = t_dis - t_cond
        flags[superheat < 0] |= SUCTION_BELOW_SATURATION
        flags[subcooling < 0] |= LIQUID_ABOVE_SATURATION
        flags[discharge_superheat < 0] |= DISCHARGE_BELOW_SATURATION

    vapour_suction = ~(superheat < 0)
    suction_state = suction.single_phase(t_suc, "h", "s", "rho")
    h1 = np.where(vapour_suction, suction_state["h"], np.nan)
    s1 = np.where(vapour_suction, suction_state["s"], np.nan)
    rho1 = np.where(vapour_suction, suction_state["rho"], np.nan)
    h2 = np.where(discharge_superheat < 0, np.nan, discharge.single_phase(t_dis, "h")["h"])
    h2s = discharge.isentropic_enthalpy(s1)
    h3 = liquid_line.single_phase(t_liq, "h")["h"]
    h3[subcooling < 0] = np.nan
    saturated_liquid = subcooling == 0  # on the line itself: liquid, not the vapour branch
    h3[saturated_liquid] = liquid_line.saturation("h_bubble")[saturated_liquid]
    h4 = h3.copy()
    h_bubble = suction.saturation("h_bubble")
    h_dew = suction.saturation("h_dew")

    reversed_pressures = ~(p_suc < p_dis)
    for values in (h2s, h4):
        values[reversed_pressures] = np.nan  # no cycle: the derived quantities below stay NaN

    with np.errstate(invalid="ignore", divide="ignore"):
        refrigerating_effect = h1 - h4
        compression_work = h2 - h1
        eta_isentropic = (h2s - h1) / compression_work
        flags[eta_isentropic > 1.0] |= DISCHARGE_BELOW_ISENTROPIC
        cop = refrigerating_effect / compression_work
        cop_carnot = np.where(
            (t_cond > t_evap) & ~reversed_pressures, t_evap / (t_cond - t_evap), np.nan
        )
        columns = {
            "t_evap": t_evap,
            "t_cond": t_cond,
            "t_cond_bubble": t_cond_bubble,
            "superheat": superheat,
            "subcooling": subcooling,
            "discharge_superheat": discharge_superheat,
            "h1": h1,
            "h2": h2,
            "h2s": h2s,
            "h3": h3,
            "h4": h4,
            "s1": s1,
            "rho1": rho1,
            "quality_evaporator_inlet": (h4 - h_bubble) / (h_dew - h_bubble),
            "eta_isentropic": eta_isentropic,
            "refrigerating_effect": refrigerating_effect,
            "compression_work": compression_work,
            "heat_rejection_effect": np.where(reversed_pressures, np.nan, h2 - h3),
            "cop": cop,
            "cop_carnot": cop_carnot,
            "second_law_efficiency": cop / cop_carnot,
            "pressure_ratio": p_dis / p_suc,
        }
    for row, name in zip(out, VALUE_COLUMNS, strict=True):
        row[...] = columns[name]
    return flags


def _flag_text(flags: np.ndarray) -> pd.Categorical:
    """Readable reasons per sample as a categorical: each distinct mask is described once."""
    present = np.flatnonzero(np.bincount(flags, minlength=1))
    codes = np.zeros(1 << len(FLAG_REASONS), dtype=np.int16)
    codes[present] = np.arange(present.size)
    texts = [describe_flags(int(mask)) for mask in present]
    return pd.Categorical.from_codes(codes[flags], categories=texts, validate=False)
