"""Refrigerant properties: a thin, named layer over CoolProp's full equations of state.

All quantities are SI and absolute: pressure [Pa], temperature [K], specific enthalpy [J/kg],
specific entropy [J/(kg K)], density [kg/m^3]. Every function accepts scalars or array-likes and
returns a float or a numpy array of the same shape. A state CoolProp cannot compute (outside the
equation of state's range, two-phase where a single phase was asked for) comes back as NaN, never as
an exception, so one bad sample cannot stop a batch.

Enthalpy and entropy use the IIR reference state (h = 200 kJ/kg, s = 1 kJ/(kg K) for saturated
liquid at 0 degC) for every supported refrigerant, ammonia included; CoolProp's default for ammonia
differs, so :func:`coolprop` sets it before CoolProp's first use.

CoolProp takes about 2 s to import, so it is imported on first use (:func:`coolprop`,
:func:`humid_air_function`). The critical and triple points, which analyses read on every run,
are cached on disk (``constants-coolprop<version>.npz`` in :func:`cache_directory`, beside the
property tables of :mod:`rimewatch.physics.fast` and :mod:`rimewatch.physics.virtual_sensors`), so
a process whose tables are all cached never imports CoolProp.

References
----------
.. [1] Bell, I. H., Wronski, J., Quoilin, S., Lemort, V. (2014). "Pure and Pseudo-pure Fluid
   Thermophysical Property Evaluation and the Open-Source Thermophysical Property Library CoolProp."
   Ind. Eng. Chem. Res. 53(6): 2498-2508. :doi:`10.1021/ie4033999`
"""

from __future__ import annotations

import importlib.metadata
import os
import tempfile
import threading
import warnings
import zipfile
from functools import cache
from pathlib import Path
from typing import Literal

import numpy as np

from rimewatch.physics.catalogue import (
    SUPPORTED,
    Refrigerant,
    UnsupportedRefrigerantError,
    get_refrigerant,
)

__all__ = [
    "SUPPORTED",
    "Refrigerant",
    "UnsupportedRefrigerantError",
    "critical_point",
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
    "triple_point",
]

Phase = Literal["dew", "bubble"]


COOLPROP_VERSION: str = importlib.metadata.version("CoolProp")  # = CoolProp.__version__

_import_lock = threading.Lock()


@cache
def _imported_coolprop():
    import CoolProp.CoolProp as CP

    CP.set_reference_state("Ammonia", "IIR")
    return CP


def coolprop():
    """The module ``CoolProp.CoolProp``, imported on first use, with ammonia on the IIR reference
    state."""
    with _import_lock:  # set up once, before any thread uses it
        return _imported_coolprop()


@cache
def humid_air_function():
    """CoolProp's humid-air function ``HAPropsSI``, imported on first use."""
    coolprop()  # whichever part of CoolProp comes first, ammonia is set up as above
    from CoolProp.HumidAirProp import HAPropsSI

    return HAPropsSI


def cache_directory() -> Path:
    """Folder of cached tables: ``tables/`` in ``$RIMEWATCH_CACHE_DIR`` or ``~/.cache/rimewatch``"""
    base = os.environ.get("RIMEWATCH_CACHE_DIR") or Path.home() / ".cache" / "rimewatch"
    return Path(base) / "tables"


def load_arrays(path: Path) -> dict[str, np.ndarray] | None:
    """The arrays of a cached ``.npz`` file; None when it is missing, damaged or unreadable."""
    try:
        with np.load(path) as arrays:
            return {name: arrays[name] for name in arrays.files}
    except (OSError, ValueError, EOFError, zipfile.BadZipFile):
        return None


def save_arrays(path: Path, arrays: dict[str, np.ndarray]) -> None:
    """Write a cache file atomically, so a concurrent reader never sees half a file.

    A folder that cannot be written (read-only home, full disk) costs a warning, not the result:
    the caller goes on with the arrays it computed, and the next process computes them again.
    """
    temporary = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        with tempfile.NamedTemporaryFile(dir=path.parent, suffix=".npz", delete=False) as handle:
            temporary = Path(handle.name)
            np.savez(handle, **arrays)
        os.replace(temporary, path)
    except OSError as exc:
        if temporary is not None:
            temporary.unlink(missing_ok=True)
        warnings.warn(
            f"property cache not written ({exc}); computing without it. Set RIMEWATCH_CACHE_DIR "
            "to a writable folder to keep the tables between runs.",
            RuntimeWarning,
            stacklevel=2,
        )


_local = threading.local()


def _state(refrigerant: Refrigerant):
    """This thread's full-equation-of-state AbstractState for the refrigerant (reused)."""
    cache = _local.__dict__.setdefault("states", {})
    state = cache.get(refrigerant.designation)
    if state is None:
        state = coolprop().AbstractState("HEOS", refrigerant.coolprop_name)
        cache[refrigerant.designation] = state
    return state


def _imposed_phase(phase):
    """CoolProp's phase constant for ``"gas"`` or ``"liquid"``; None for no imposed phase."""
    if phase is None:
        return None
    CP = coolprop()
    return {"gas": CP.iphase_gas, "liquid": CP.iphase_liquid}[phase]


def _evaluate(refrigerant, pair, first, second, outputs, phase=None):
    """Flash each (first, second) pair with CoolProp and read ``outputs`` (AbstractState methods).

    Returns an array of shape ``(len(outputs),) + broadcast shape``; NaN where CoolProp fails.
    """
    fluid = get_refrigerant(refrigerant)
    state = _state(fluid)
    a, b = np.broadcast_arrays(np.asarray(first, dtype=float), np.asarray(second, dtype=float))
    result = np.full((len(outputs), *a.shape), np.nan)
    imposed = _imposed_phase(phase)
    if imposed is not None:
        state.specify_phase(imposed)
    try:
        for index in np.ndindex(a.shape):
            x, y = a[index], b[index]
            if not (np.isfinite(x) and np.isfinite(y)):
                continue
            try:
                state.update(pair, x, y)
            except ValueError:
                continue
            for k, name in enumerate(outputs):
                result[(k, *index)] = getattr(state, name)()
    finally:
        if imposed is not None:
            state.unspecify_phase()
    return result


def _scalar_or_array(values: np.ndarray):
    return float(values) if values.ndim == 0 else values


def _quality(phase: Phase) -> float:
    if phase not in ("dew", "bubble"):
        raise ValueError(f"phase must be 'dew' or 'bubble', not {phase!r}")
    return 1.0 if phase == "dew" else 0.0


def _computed_constants(fluid: Refrigerant) -> tuple[float, float, float, float]:
    """Critical and triple point (T [K], p [Pa], T [K], p [Pa]) from CoolProp."""
    CP = coolprop()
    state = CP.AbstractState("HEOS", fluid.coolprop_name)
    return (
        state.T_critical(),
        state.p_critical(),
        state.Ttriple(),
        state.trivial_keyed_output(CP.iP_triple),
    )


@cache
def _cached_constants() -> dict[str, tuple[float, float, float, float]]:
    """:func:`_computed_constants` of every supported refrigerant, by designation: from the disk
    cache, else computed and cached (a few milliseconds once CoolProp is imported)."""
    path = cache_directory() / f"constants-coolprop{COOLPROP_VERSION}.npz"
    stored = load_arrays(path)
    if stored is None or any(np.shape(stored.get(name)) != (4,) for name in SUPPORTED):
        stored = {name: np.array(_computed_constants(f)) for name, f in SUPPORTED.items()}
        save_arrays(path, stored)
    return {name: tuple(float(x) for x in stored[name]) for name in SUPPORTED}


def _constants(fluid: Refrigerant) -> tuple[float, float, float, float]:
    found = _cached_constants().get(fluid.designation)
    return found if found is not None else _computed_constants(fluid)


def critical_point(refrigerant: str | Refrigerant) -> tuple[float, float]:
    """Critical temperature [K] and pressure [Pa] of the refrigerant's equation of state."""
    return _constants(get_refrigerant(refrigerant))[:2]


def triple_point(refrigerant) -> tuple[float, float]:
    """Triple-point temperature [K] and pressure [Pa]: below them no liquid exists.

    For the blends (R404A, R407C, R410A, R507A) CoolProp gives the lower limit of the
    pseudo-pure equation of state instead.
    """
    return _constants(get_refrigerant(refrigerant))[2:]


def _no_liquid_below(values: np.ndarray, inputs, limit: float) -> np.ndarray:
    """NaN where the input lies below the triple point: no saturation exists there (CoolProp
    would extrapolate a metastable liquid-vapour line, e.g. R744 at 1 atm: -88 degC)."""
    with np.errstate(invalid="ignore"):
        return np.where(np.asarray(inputs, dtype=float) < limit * (1 - 1e-9), np.nan, values)


def saturation_temperature(refrigerant, pressure, phase: Phase = "dew"):
    """Saturation temperature [K] at ``pressure`` [Pa].

    ``phase="dew"`` gives the dew point (saturated vapour: use it for superheat and for the
    evaporating and condensing temperatures of compressor maps); ``"bubble"`` the bubble point
    (saturated liquid: use it for subcooling). They differ for zeotropic blends. NaN at or above the
    critical pressure, where no saturation exists.
    """
    out = _evaluate(refrigerant, coolprop().PQ_INPUTS, pressure, _quality(phase), ("T",))[0]
    return _scalar_or_array(_no_liquid_below(out, pressure, triple_point(refrigerant)[1]))


def saturation_pressure(refrigerant, temperature, phase: Phase = "dew"):
    """Saturation pressure [Pa] at ``temperature`` [K] (dew or bubble point, see above)."""
    out = _evaluate(refrigerant, coolprop().QT_INPUTS, _quality(phase), temperature, ("p",))[0]
    return _scalar_or_array(_no_liquid_below(out, temperature, triple_point(refrigerant)[0]))


def saturated_enthalpy(refrigerant, pressure, phase: Phase = "dew"):
    """Enthalpy [J/kg] of saturated vapour (``"dew"``) or liquid (``"bubble"``) at ``pressure``."""
    out = _evaluate(refrigerant, coolprop().PQ_INPUTS, pressure, _quality(phase), ("hmass",))[0]
    return _scalar_or_array(_no_liquid_below(out, pressure, triple_point(refrigerant)[1]))


def saturated_entropy(refrigerant, pressure, phase: Phase = "dew"):
    """Entropy [J/(kg K)] of saturated vapour or liquid at ``pressure`` [Pa]."""
    out = _evaluate(refrigerant, coolprop().PQ_INPUTS, pressure, _quality(phase), ("smass",))[0]
    return _scalar_or_array(_no_liquid_below(out, pressure, triple_point(refrigerant)[1]))


def latent_heat(refrigerant, temperature):
    """Enthalpy of vaporisation h_dew - h_bubble [J/kg] at saturation temperature [K].

    For a zeotropic blend the two points sit at different pressures (CoolProp's pseudo-pure
    convention at equal temperature).
    """
    vapour = _evaluate(refrigerant, coolprop().QT_INPUTS, 1.0, temperature, ("hmass",))[0]
    liquid = _evaluate(refrigerant, coolprop().QT_INPUTS, 0.0, temperature, ("hmass",))[0]
    latent = _no_liquid_below(vapour - liquid, temperature, triple_point(refrigerant)[0])
    return _scalar_or_array(latent)


def _single_phase(refrigerant, pressure, temperature, output: str):
    """A single-phase property at (P, T): vapour at or above the dew point, liquid at or below the
    bubble point, supercritical fluid above the critical pressure; NaN in between."""
    fluid = get_refrigerant(refrigerant)
    pt = coolprop().PT_INPUTS
    p, t = np.broadcast_arrays(np.asarray(pressure, float), np.asarray(temperature, float))
    t_dew = np.asarray(saturation_temperature(fluid, p, "dew"))
    out = np.full(p.shape, np.nan)
    supercritical = p >= fluid.critical_pressure
    if supercritical.any():
        out[supercritical] = _evaluate(fluid, pt, p[supercritical], t[supercritical], (output,))[0]
    vapour = ~supercritical & (t >= t_dew)
    if vapour.any():
        out[vapour] = _evaluate(fluid, pt, p[vapour], t[vapour], (output,), "gas")[0]
    liquid = ~supercritical & (t < t_dew)
    if liquid.any():
        t_bubble = np.asarray(saturation_temperature(fluid, p, "bubble"))
        below = liquid & (t <= t_bubble)
        out[below] = _evaluate(fluid, pt, p[below], t[below], (output,), "liquid")[0]
    return _scalar_or_array(out)


def enthalpy(refrigerant, pressure, temperature):
    """Specific enthalpy [J/kg] of superheated vapour or subcooled liquid at (P [Pa], T [K]).

    NaN inside the two-phase region of a blend (between bubble and dew point), where pressure and
    temperature do not fix the state's enthalpy alone.
    """
    return _single_phase(refrigerant, pressure, temperature, "hmass")


def entropy(refrigerant, pressure, temperature):
    """Specific entropy [J/(kg K)] at (P [Pa], T [K]); single phase only, as :func:`enthalpy`."""
    return _single_phase(refrigerant, pressure, temperature, "smass")


def density(refrigerant, pressure, temperature):
    """Density [kg/m^3] at (P [Pa], T [K]); single phase only, as :func:`enthalpy`."""
    return _single_phase(refrigerant, pressure, temperature, "rhomass")


def isentropic_state(refrigerant, pressure, entropy_):
    """End state of an isentropic process: (temperature [K], enthalpy [J/kg]) at (P [Pa], s).

    Used for the isentropic compressor discharge state 2s from the suction entropy s1. Works in the
    two-phase region too (wet compression of a dry fluid).
    """
    out = _evaluate(refrigerant, coolprop().PSmass_INPUTS, pressure, entropy_, ("T", "hmass"))
    return _scalar_or_array(out[0]), _scalar_or_array(out[1])


def quality(refrigerant, pressure, enthalpy_):
    """Vapour quality [-] at (P [Pa], h [J/kg]): 0 saturated liquid, 1 saturated vapour.

    Computed as (h - h_bubble) / (h_dew - h_bubble) at the same pressure, so values below 0
    (subcooled) and above 1 (superheated) are returned as they are rather than clipped.
    """
    h_liquid = np.asarray(saturated_enthalpy(refrigerant, pressure, "bubble"))
    h_vapour = np.asarray(saturated_enthalpy(refrigerant, pressure, "dew"))
    return _scalar_or_array((np.asarray(enthalpy_, float) - h_liquid) / (h_vapour - h_liquid))
