"""Property tables for the simulator's inner loop: refrigerant and moist air on uniform grids.

The simulator solves every minute of a year at once with Newton iterations over numpy arrays, which
evaluates a few dozen properties per sample per iteration. Each property is therefore looked up in a
small table on a uniform grid of the *dew-point temperature* (the solver's own unknowns are the
evaporating and condensing dew points) and interpolated linearly, which costs a few nanoseconds per
sample. The tables are filled once per refrigerant (and per site pressure for moist air) from
``rimewatch.physics`` (the fast tables when present, else the exact CoolProp path) and from
CoolProp's humid-air functions ``HAPropsSI``.

Grid steps (0.25 K in saturation temperature, 2 K in superheat) keep the linear-interpolation error
of enthalpies below about 0.1 kJ/kg over the simulator's range (checked in tests/sim).

References
----------
.. [1] Bell, I. H. et al. (2014). "Pure and Pseudo-pure Fluid Thermophysical Property Evaluation and
   the Open-Source Thermophysical Property Library CoolProp." Ind. Eng. Chem. Res. 53(6): 2498-2508.
   :doi:`10.1021/ie4033999`
.. [2] ASHRAE Handbook - Fundamentals (2017), chapter 1 "Psychrometrics": humidity ratio
   W = 0.621945 p_w / (p - p_w) (eq. 20) and relative humidity p_w = phi p_ws (eq. 24).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from rimewatch.physics import refrigerant as exact
from rimewatch.physics.refrigerant import get_refrigerant, humid_air_function

try:  # the single switch between the table-based and the exact property paths
    from rimewatch.physics import fast as properties
except ImportError:  # pragma: no cover - only before physics.fast exists
    properties = exact

SATURATION_STEP_K = 0.25
SUPERHEAT_STEP_K = 2.0
SUPERHEAT_SPAN_K = 120.0
LOWEST_SATURATION_K = 228.15  # -45 degC
HIGHEST_SATURATION_K = 343.15  # 70 degC, or 4 K below the critical temperature if lower


@dataclass(frozen=True)
class Grid:
    """A uniform axis ``start + step * k``, k = 0 .. nodes - 1."""

    start: float
    step: float
    nodes: int

    @property
    def stop(self) -> float:
        return self.start + self.step * (self.nodes - 1)

    def values(self) -> np.ndarray:
        return self.start + self.step * np.arange(self.nodes)

    def locate(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Cell index and fractional position of ``x``, clamped to the grid."""
        q = np.clip((x - self.start) / self.step, 0.0, self.nodes - 1.000001)
        q = np.nan_to_num(q)
        i = q.astype(np.intp)
        return i, q - i


def lerp(table: np.ndarray, located: tuple[np.ndarray, np.ndarray]) -> np.ndarray:
    """Linear interpolation of a 1-D table at a located position (see :meth:`Grid.locate`)."""
    i, t = located
    low = table[i]
    return low + t * (table[i + 1] - low)


def bilerp(table: np.ndarray, rows: tuple, cols: tuple) -> np.ndarray:
    """Bilinear interpolation of a 2-D table at located row and column positions."""
    i, s = rows
    j, t = cols
    a, b = table[i, j], table[i, j + 1]
    c, d = table[i + 1, j], table[i + 1, j + 1]
    top = a + t * (b - a)
    return top + s * (c + t * (d - c) - top)


@dataclass(frozen=True)
class RefrigerantTables:
    """Saturation and superheated-vapour properties against the dew-point temperature [K].

    1-D columns (index = dew temperature on ``grid``), all at the dew pressure ``p``:
    ``p`` [Pa], ``t_bubble`` [K], ``h_vapour``, ``h_liquid`` [J/kg], ``rho_vapour``, ``rho_liquid``
    [kg/m^3], ``cp_vapour``, ``cp_liquid`` [J/(kg K)] (secants over 3 K next to saturation).
    2-D ``h_superheated`` [J/kg] and ``rho_superheated`` [kg/m^3] against (dew temperature,
    superheat on ``superheat_grid``).
    """

    designation: str
    grid: Grid
    superheat_grid: Grid
    p: np.ndarray
    ln_p: np.ndarray
    t_bubble: np.ndarray
    h_vapour: np.ndarray
    h_liquid: np.ndarray
    rho_vapour: np.ndarray
    rho_liquid: np.ndarray
    cp_vapour: np.ndarray
    cp_liquid: np.ndarray
    h_superheated: np.ndarray
    rho_superheated: np.ndarray

    def dew_temperature(self, pressure: np.ndarray) -> np.ndarray:
        """Dew-point temperature [K] at pressure [Pa] (inverse of the ``p`` column)."""
        return np.interp(np.log(pressure), self.ln_p, self.grid.values())

    def bubble_pressure(self, temperature: np.ndarray) -> np.ndarray:
        """Bubble-point pressure [Pa] at temperature [K] (saturated liquid at that temperature)."""
        return np.exp(np.interp(temperature, self.t_bubble, self.ln_p))

    def superheated(self, t_dew: np.ndarray, superheat: np.ndarray):
        """Enthalpy [J/kg] and density [kg/m^3] of vapour ``superheat`` [K] above its dew point."""
        rows = self.grid.locate(t_dew)
        cols = self.superheat_grid.locate(superheat)
        return bilerp(self.h_superheated, rows, cols), bilerp(self.rho_superheated, rows, cols)

    def superheat_from_enthalpy(self, t_dew: np.ndarray, h: np.ndarray) -> np.ndarray:
        """Superheat [K] of vapour with enthalpy ``h`` [J/kg] at dew point ``t_dew`` [K].

        Newton iterations on the tabulated h(T_dew, superheat), started from the saturated c_p.
        """
        rows = self.grid.locate(t_dew)
        h_dew = lerp(self.h_vapour, rows)
        superheat = np.maximum((h - h_dew) / lerp(self.cp_vapour, rows), 0.0)
        step = self.superheat_grid.step
        for _ in range(4):
            cols = self.superheat_grid.locate(superheat)
            j = cols[0]
            slope = (self.h_superheated[rows[0], j + 1] - self.h_superheated[rows[0], j]) / step
            error = h - bilerp(self.h_superheated, rows, cols)
            superheat = np.clip(superheat + error / slope, 0.0, self.superheat_grid.stop)
        return superheat


def _saturation_limits(designation: str) -> tuple[float, float]:
    t_critical, _ = exact.critical_point(designation)
    high = min(HIGHEST_SATURATION_K, t_critical - 4.0)
    if high - LOWEST_SATURATION_K < 40.0:
        raise ValueError(
            f"{designation}: critical temperature {t_critical - 273.15:.1f} degC is too low for "
            "an air-cooled condenser; the simulator covers subcritical cycles only"
        )
    return LOWEST_SATURATION_K, high


@lru_cache(maxsize=16)
def refrigerant_tables(name: str) -> RefrigerantTables:
    """The refrigerant's simulator tables (built once per process, about a second)."""
    fluid = get_refrigerant(name)
    low, high = _saturation_limits(fluid.designation)
    nodes = int(np.floor((high - low) / SATURATION_STEP_K)) + 1
    grid = Grid(low, SATURATION_STEP_K, nodes)
    t_dew = grid.values()
    p = np.asarray(exact.saturation_pressure(fluid, t_dew, "dew"))
    t_bubble = np.asarray(properties.saturation_temperature(fluid, p, "bubble"))
    h_vapour = np.asarray(properties.saturated_enthalpy(fluid, p, "dew"))
    h_liquid = np.asarray(properties.saturated_enthalpy(fluid, p, "bubble"))
    offset = 0.02  # K off the saturation line, so the single-phase functions see one phase
    rho_vapour = np.asarray(properties.density(fluid, p, t_dew + offset))
    rho_liquid = np.asarray(properties.density(fluid, p, t_bubble - offset))
    cp_vapour = (np.asarray(properties.enthalpy(fluid, p, t_dew + 3.0)) - h_vapour) / 3.0
    cp_liquid = (h_liquid - np.asarray(properties.enthalpy(fluid, p, t_bubble - 3.0))) / 3.0

    superheat_grid = Grid(0.0, SUPERHEAT_STEP_K, int(SUPERHEAT_SPAN_K / SUPERHEAT_STEP_K) + 1)
    superheat = superheat_grid.values()
    superheat[0] = offset
    p_2d = np.repeat(p[:, None], superheat.size, axis=1)
    t_2d = t_dew[:, None] + superheat[None, :]
    h_superheated = np.asarray(properties.enthalpy(fluid, p_2d, t_2d)).reshape(p_2d.shape)
    rho_superheated = np.asarray(properties.density(fluid, p_2d, t_2d)).reshape(p_2d.shape)
    h_superheated[:, 0] = h_vapour
    rho_superheated[:, 0] = rho_vapour
    columns = (h_vapour, h_liquid, rho_vapour, rho_liquid, cp_vapour, cp_liquid, t_bubble)
    if not all(np.isfinite(c).all() for c in columns) or not np.isfinite(h_superheated).all():
        raise ValueError(f"{fluid.designation}: property tables have gaps over the simulator range")
    return RefrigerantTables(
        fluid.designation,
        grid,
        superheat_grid,
        p,
        np.log(p),
        t_bubble,
        h_vapour,
        h_liquid,
        rho_vapour,
        rho_liquid,
        cp_vapour,
        cp_liquid,
        h_superheated,
        rho_superheated,
    )


AIR_GRID = Grid(233.15, 0.25, 481)  # -40 .. 80 degC
_W_PROBE = 0.02  # kg/kg, humidity ratio of the second column used for the linear-in-W fits


@dataclass(frozen=True)
class AirTables:
    """Moist-air properties at one total pressure, per kg of dry air, from ``HAPropsSI`` [1].

    At fixed temperature, enthalpy and specific volume are linear in the humidity ratio W (ideal
    mixing), so each is stored as a value at W = 0 and a slope d/dW.
    """

    pressure: float
    h_dry: np.ndarray  # J/kg_da at W = 0
    h_per_w: np.ndarray  # J/kg_da per kg_w/kg_da
    v_dry: np.ndarray  # m^3/kg_da at W = 0
    v_per_w: np.ndarray
    h_saturated: np.ndarray  # J/kg_da of saturated air
    w_saturated: np.ndarray  # kg_w/kg_da
    p_water_saturated: np.ndarray  # Pa

    def enthalpy(self, t: np.ndarray, w: np.ndarray) -> np.ndarray:
        """Moist-air enthalpy [J/kg dry air] at temperature [K] and humidity ratio [kg/kg]."""
        at = AIR_GRID.locate(t)
        return lerp(self.h_dry, at) + w * lerp(self.h_per_w, at)

    def temperature(self, h: np.ndarray, w: np.ndarray) -> np.ndarray:
        """Dry-bulb temperature [K] from enthalpy [J/kg_da] and humidity ratio (2 Newton steps)."""
        t = 273.15 + (h - 2.501e6 * w) / (1006.0 + 1860.0 * w)
        for _ in range(2):
            at = AIR_GRID.locate(t)
            slope = (
                (self.h_dry[at[0] + 1] - self.h_dry[at[0]])
                + w * (self.h_per_w[at[0] + 1] - self.h_per_w[at[0]])
            ) / AIR_GRID.step
            t = t + (h - self.enthalpy(t, w)) / slope
        return t

    def specific_volume(self, t: np.ndarray, w: np.ndarray) -> np.ndarray:
        """Specific volume [m^3/kg dry air]."""
        at = AIR_GRID.locate(t)
        return lerp(self.v_dry, at) + w * lerp(self.v_per_w, at)

    def saturated_enthalpy(self, t: np.ndarray) -> np.ndarray:
        """Enthalpy of saturated air [J/kg_da] at temperature [K]."""
        return lerp(self.h_saturated, AIR_GRID.locate(t))

    def saturation_temperature_from_enthalpy(self, h: np.ndarray) -> np.ndarray:
        """Temperature [K] of saturated air with enthalpy ``h`` [J/kg_da]."""
        return np.interp(h, self.h_saturated, AIR_GRID.values())

    def saturated_humidity_ratio(self, t: np.ndarray) -> np.ndarray:
        """Humidity ratio of saturated air [kg/kg] at temperature [K]."""
        return lerp(self.w_saturated, AIR_GRID.locate(t))

    def humidity_ratio(self, t: np.ndarray, relative_humidity: np.ndarray) -> np.ndarray:
        """Humidity ratio [kg/kg] at temperature [K] and relative humidity 0-1 ([2] eq. 20, 24)."""
        p_w = relative_humidity * lerp(self.p_water_saturated, AIR_GRID.locate(t))
        return 0.621945 * p_w / (self.pressure - p_w)

    def relative_humidity(self, t: np.ndarray, w: np.ndarray) -> np.ndarray:
        """Relative humidity [0-1] from temperature [K] and humidity ratio [kg/kg]."""
        p_w = self.pressure * w / (0.621945 + w)
        return p_w / lerp(self.p_water_saturated, AIR_GRID.locate(t))


@lru_cache(maxsize=8)
def air_tables(pressure: float = 101325.0) -> AirTables:
    """Moist-air tables at total pressure [Pa], from CoolProp ``HAPropsSI`` [1]."""
    HAPropsSI = humid_air_function()
    t = AIR_GRID.values()
    p = np.full_like(t, pressure)
    zero, probe, one = np.zeros_like(t), np.full_like(t, _W_PROBE), np.ones_like(t)
    h_dry = HAPropsSI("H", "T", t, "W", zero, "P", p)
    h_probe = HAPropsSI("H", "T", t, "W", probe, "P", p)
    v_dry = HAPropsSI("Vda", "T", t, "W", zero, "P", p)
    v_probe = HAPropsSI("Vda", "T", t, "W", probe, "P", p)
    return AirTables(
        pressure=float(pressure),
        h_dry=h_dry,
        h_per_w=(h_probe - h_dry) / _W_PROBE,
        v_dry=v_dry,
        v_per_w=(v_probe - v_dry) / _W_PROBE,
        h_saturated=HAPropsSI("H", "T", t, "R", one, "P", p),
        w_saturated=HAPropsSI("W", "T", t, "R", one, "P", p),
        p_water_saturated=HAPropsSI("P_w", "T", t, "R", one, "P", p),
    )
