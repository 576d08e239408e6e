"""Virtual sensors: quantities field units rarely measure, from the ones they do.

Refrigerant side (per sample, SI): mass flow from the compressor map with the suction-density
correction [2], mass flow from the compressor energy balance [3], their ratio as a volumetric-
efficiency ratio [3], cooling capacity, heat rejection, compressor power and COP [1], with
inch-pound equivalents. Air side: evaporator total, sensible and latent capacity and the condenser
air temperature rise from air temperatures, humidity and airflow, with moist-air properties from
CoolProp's ``HAPropsSI`` [4], and virtual airflows from the refrigerant-side capacity. A charge
indicator after Li and Braun [5]. :func:`compute` assembles them all for a frame of
:func:`rimewatch.physics.cycle.cycle_states`.

State numbering as in :mod:`rimewatch.physics.cycle`: 1 compressor suction, 2 discharge,
3 liquid before the expansion device, 4 evaporator inlet (h4 = h3).

References
----------
.. [1] ASHRAE Handbook - Fundamentals (2021), chapter 2 "Thermodynamics and Refrigeration Cycles":
   steady-flow energy balances of the vapor-compression cycle.
.. [2] Dabiri, A. E., Rice, C. K. (1981). "A compressor simulation model with corrections for the
   level of suction gas superheat." ASHRAE Transactions 87(2).
.. [3] Li, H., Braun, J. E. (2007). "Decoupling features and virtual sensors for diagnosis of
   faults in vapor compression air conditioners." International Journal of Refrigeration 30(3):
   546-564 (volume and pages from memory).
.. [4] Bell, I. H. et al. (2014), CoolProp (cited in :mod:`rimewatch.physics.refrigerant`): the
   humid-air function ``HAPropsSI``, after ASHRAE RP-1485 (Herrmann, S., Kretzschmar, H.-J.,
   Gatley, D. P. (2009) "Thermodynamic properties of real moist air, dry air, steam, water, and
   ice"). Sensible and latent loads as defined in ASHRAE Handbook - Fundamentals, chapter 1
   "Psychrometrics".
.. [5] Li, H., Braun, J. E. (2009). "Development, evaluation, and demonstration of a virtual
   refrigerant charge sensor." HVAC&R Research 15(1): 117-136.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from functools import lru_cache

import numpy as np
import pandas as pd

from rimewatch.physics import fast
from rimewatch.physics.compressor import CompressorMap, density_corrected_mass_flow
from rimewatch.physics.refrigerant import (
    COOLPROP_VERSION,
    cache_directory,
    humid_air_function,
    load_arrays,
    save_arrays,
)

STANDARD_PRESSURE = 101325.0  # Pa
WATTS_PER_BTU_PER_HOUR = 1055.05585262 / 3600.0  # International Table Btu, exact
WATTS_PER_TON = 12000.0 * WATTS_PER_BTU_PER_HOUR  # ton of refrigeration = 12 000 Btu/h
# Heat a hermetic compressor shell loses to its surroundings, as a fraction of its input power.
# Common practice for hermetic compressors in moving air is 5-10 %; calibrate per unit when the
# refrigerant mass flow can be measured once.
DEFAULT_SHELL_LOSS_FRACTION = 0.05
# Air leaving a wet cooling coil is close to, but not at, saturation (common practice 90-95 %RH).
DEFAULT_COIL_LEAVING_RH = 0.95
# Samples per pass of compute(): a pass's temporaries then stay in the CPU cache.
BLOCK_SAMPLES = 32768


def _out(values):
    values = np.asarray(values, dtype=float)
    return float(values) if values.ndim == 0 else values


# ---------------------------------------------------------------------------------------------
# Refrigerant side
# ---------------------------------------------------------------------------------------------


def map_mass_flow(
    compressor_map: CompressorMap,
    suction_pressure,
    t_evap,
    t_cond,
    suction_temp,
    speed=None,
    extrapolate=False,
):
    """Refrigerant mass flow [kg/s] from a compressor map at the actual suction state.

    The AHRI 540 map value at (t_evap, t_cond) holds for the map's rating suction temperature; it
    is moved to the measured suction temperature with the density correction of Dabiri and
    Rice [2]: m = [1 + F_v (v_rated / v_actual - 1)] m_map.

    Parameters
    ----------
    compressor_map : CompressorMap
    suction_pressure : numeric
        Compressor suction pressure [Pa].
    t_evap, t_cond : numeric
        Suction and discharge dew-point temperatures [K].
    suction_temp : numeric
        Measured suction gas temperature [K].
    speed : numeric, optional
        Compressor speed [Hz], for variable-speed maps.
    extrapolate : bool
        False: NaN outside the map envelope (see :meth:`CompressorMap.in_envelope`).
    """
    m_map = compressor_map.mass_flow(t_evap, t_cond, speed, extrapolate)
    rated_temp = compressor_map.rated_suction_temperature(t_evap)
    p, actual, rated = np.broadcast_arrays(
        *(np.asarray(x, float) for x in (suction_pressure, suction_temp, rated_temp))
    )
    at_suction = fast.PressureLookup(compressor_map.refrigerant, p)  # located once for both
    rho = at_suction.single_phase(actual.reshape(-1), "rho")["rho"].reshape(p.shape)
    rho_rated = at_suction.single_phase(rated.reshape(-1), "rho")["rho"].reshape(p.shape)
    return _out(
        density_corrected_mass_flow(m_map, rho, rho_rated, compressor_map.density_correction_factor)
    )


def energy_balance_mass_flow(
    compressor_power, h1, h2, shell_loss_fraction=DEFAULT_SHELL_LOSS_FRACTION
):
    """Refrigerant mass flow [kg/s] from the compressor energy balance [3].

    .. math:: \\dot m = (1 - f_{loss}) \\dot W / (h_2 - h_1)

    Parameters
    ----------
    compressor_power : numeric
        Measured electrical input power [W].
    h1, h2 : numeric
        Suction and discharge enthalpy [J/kg].
    shell_loss_fraction : float
        f_loss [-], the fraction of input power lost as heat from the shell (and motor/drive) to
        the surroundings rather than to the refrigerant; 0.05 by default (common practice).

    Returns
    -------
    numeric
        NaN where the enthalpy rise is not positive or the power is not positive.
    """
    power = np.asarray(compressor_power, float)
    rise = np.asarray(h2, float) - np.asarray(h1, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        flow = (1.0 - shell_loss_fraction) * power / rise
    return _out(np.where((rise > 0) & (power > 0), flow, np.nan))


def volumetric_efficiency_ratio(mass_flow_balance, mass_flow_map):
    """Energy-balance mass flow over map mass flow [-], a compressor health indicator [3].

    Both flows hold at the same suction density, so their ratio is the ratio of the compressor's
    actual to mapped volumetric efficiency: about 1 for a sound compressor, falling with valve or
    scroll leakage (compressed gas leaking back to suction).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return _out(np.asarray(mass_flow_balance, float) / np.asarray(mass_flow_map, float))


def cooling_capacity(mass_flow, h1, h4):
    """Refrigerant-side cooling capacity [W]: m (h1 - h4) [1]."""
    return _out(np.asarray(mass_flow, float) * (np.asarray(h1, float) - np.asarray(h4, float)))


def heat_rejection(mass_flow, h2, h3):
    """Condenser heat rejection [W]: m (h2 - h3) [1]."""
    return _out(np.asarray(mass_flow, float) * (np.asarray(h2, float) - np.asarray(h3, float)))


def compressor_heat_loss(compressor_power, mass_flow, h1, h2):
    """Heat the compressor loses to its surroundings [W]: W - m (h2 - h1) [1].

    Equals shell_loss_fraction x W when the mass flow came from :func:`energy_balance_mass_flow`.
    """
    gain = np.asarray(mass_flow, float) * (np.asarray(h2, float) - np.asarray(h1, float))
    return _out(np.asarray(compressor_power, float) - gain)


def coefficient_of_performance(capacity, compressor_power):
    """COP [-]: cooling capacity [W] over compressor input power [W] [1]."""
    power = np.asarray(compressor_power, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return _out(np.where(power > 0, np.asarray(capacity, float) / power, np.nan))


def btu_per_hour(watts):
    """Heat rate in Btu/h (International Table Btu) from W."""
    return _out(np.asarray(watts, float) / WATTS_PER_BTU_PER_HOUR)


def tons_of_refrigeration(watts):
    """Capacity in tons of refrigeration (12 000 Btu/h each) from W."""
    return _out(np.asarray(watts, float) / WATTS_PER_TON)


def energy_efficiency_ratio(capacity, compressor_power):
    """EER [(Btu/h)/W]: capacity in Btu/h per watt of input, = COP x 3.412."""
    return _out(btu_per_hour(coefficient_of_performance(capacity, compressor_power)))


# ---------------------------------------------------------------------------------------------
# Air side
# ---------------------------------------------------------------------------------------------


class MoistAir:
    """Moist-air properties at one total pressure from CoolProp's ``HAPropsSI`` [4].

    Enthalpy is per kilogram of dry air, with the reference state of the ASHRAE psychrometric
    tables (dry air and liquid water at 0 degC). ``MoistAir.tabulated(p)`` gives the same
    properties from bilinear tables of ``HAPropsSI`` values (0.5 K in temperature, 5 %RH in
    humidity, 0.0025 kg/kg in humidity ratio over -40 to +60 degC), several hundred times faster,
    for long series; samples outside the tables are computed directly. The tables are cached on
    disk beside the refrigerant tables, keyed by the CoolProp version, the table layout and the
    pressure in whole pascals.
    """

    def __init__(self, pressure=STANDARD_PRESSURE):
        if not (np.isfinite(pressure) and 50e3 <= pressure <= 120e3):
            raise ValueError(f"air pressure {pressure!r} Pa is outside 50-120 kPa")
        self.pressure = float(pressure)

    @classmethod
    def tabulated(cls, pressure=STANDARD_PRESSURE) -> MoistAir:
        """The same properties from tables (cached per pressure rounded to 1 Pa)."""
        return _tabulated(round(float(pressure)))

    def _props(self, output, name1, value1, name2, value2):
        a, b = np.broadcast_arrays(np.asarray(value1, float), np.asarray(value2, float))
        out = np.full(a.shape, np.nan)
        good = np.isfinite(a) & np.isfinite(b)
        if good.any():
            HAPropsSI = humid_air_function()
            values = HAPropsSI(output, name1, a[good], name2, b[good], "P", self.pressure)
            out[good] = np.where(np.isfinite(values), values, np.nan)
        return out

    def humidity_ratio(self, temperature, relative_humidity):
        """Humidity ratio [kg water/kg dry air] at dry bulb [K] and relative humidity [0-1]."""
        return _out(self._props("W", "T", temperature, "R", relative_humidity))

    def enthalpy(self, temperature, humidity_ratio):
        """Enthalpy [J/kg dry air] at dry bulb [K] and humidity ratio [kg/kg]."""
        return _out(self._props("H", "T", temperature, "W", humidity_ratio))

    def dry_air_volume(self, temperature, humidity_ratio):
        """Specific volume [m^3 per kg dry air] at dry bulb [K] and humidity ratio [kg/kg]."""
        return _out(self._props("Vda", "T", temperature, "W", humidity_ratio))

    def _evaporator_states(self, return_temp, return_rh, supply_temp, supply_rh, coil_leaving_rh):
        """h(T_r, W_r), h(T_s, W_s), h(T_r, W_s) [J/kg dry air] and v_da(T_r, W_r) [m^3/kg]."""
        w_r = np.asarray(self.humidity_ratio(return_temp, return_rh), float)
        w_s = np.asarray(
            supply_humidity_ratio(self, w_r, supply_temp, supply_rh, coil_leaving_rh), float
        )
        h_r = self.enthalpy(return_temp, w_r)
        h_s = self.enthalpy(supply_temp, w_s)
        h_r_dry = self.enthalpy(return_temp, w_s)  # entering temperature, leaving humidity
        return h_r, h_s, h_r_dry, self.dry_air_volume(return_temp, w_r)

    def _condenser_states(self, entering_temp, leaving_temp, entering_rh):
        """h(T_in, W), h(T_out, W) [J/kg dry air] and v_da(T_in, W) [m^3/kg], W = W(T_in, RH)."""
        w = self.humidity_ratio(entering_temp, entering_rh)
        h_in, h_out = self.enthalpy(entering_temp, w), self.enthalpy(leaving_temp, w)
        return h_in, h_out, self.dry_air_volume(entering_temp, w)


@dataclass(frozen=True)
class _Location:
    """Samples located on a uniform grid: cell index, fraction of the cell, inside the grid."""

    samples: np.ndarray
    cell: np.ndarray | None
    fraction: np.ndarray | None
    inside: np.ndarray


@dataclass(frozen=True)
class _Grid:
    """A uniform axis ``start + step * k``, k = 0 .. nodes - 1."""

    start: float
    step: float
    nodes: int

    def values(self) -> np.ndarray:
        return self.start + self.step * np.arange(self.nodes)

    def locate(self, x: np.ndarray) -> _Location:
        q = x - self.start
        q *= 1.0 / self.step
        inside = (q >= 0.0) & (q <= self.nodes - 1)
        cell = np.fmax(q, 0.0)  # fmax/fmin map NaN to the bound; such samples are outside
        np.fmin(cell, self.nodes - 2.0, out=cell)
        cell = cell.astype(np.intp)
        q -= cell
        return _Location(x, cell, q, inside)


def _bilinear_cells(table: np.ndarray) -> np.ndarray:
    """Per-cell coefficients (c0, cu, cv, cuv), shape (4, cells), of a 2-D table.

    Inside a cell, with fractions u and v along the two axes, the bilinear interpolant is
    ``c0 + cu u + (cv + cuv u) v``; one column holds all a sample needs, fetched by one ``take``.
    """
    a, b, c, d = table[:-1, :-1], table[1:, :-1], table[:-1, 1:], table[1:, 1:]
    return np.stack([a, b - a, c - a, d - b - c + a]).reshape(4, -1)


def _bilinear(rows: np.ndarray, first: int, u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Evaluate the cell coefficients ``rows[first:first + 4]`` at fractions u, v."""
    out = rows[first + 3] * u
    out += rows[first + 2]
    out *= v
    out += rows[first]
    out += rows[first + 1] * u
    return out


def _flat(value, shape) -> np.ndarray:
    return np.broadcast_to(np.asarray(value, float), shape).reshape(-1)


def _shaped(values: np.ndarray, shape):
    return float(values[0]) if shape == () else values.reshape(shape)


class _TabulatedMoistAir(MoistAir):
    """:class:`MoistAir` from bilinear tables of ``HAPropsSI`` values.

    Each temperature is located on the grid once and shared by every property looked up at it;
    enthalpy and specific volume sit side by side in one table of per-cell coefficients.
    """

    TEMPERATURE = _Grid(233.15, 0.5, 201)  # -40 .. +60 degC [K]
    RELATIVE_HUMIDITY = _Grid(0.0, 0.05, 21)  # [-]
    HUMIDITY_RATIO = _Grid(0.0, 0.0025, 21)  # [kg/kg]
    LAYOUT = 1  # bump when the grids above change, so cached tables are rebuilt

    def __init__(self, pressure: int):
        """Tables at ``pressure`` [Pa], a whole number (the cache key)."""
        super().__init__(pressure)
        self._exact = MoistAir(pressure)
        tables = self._cached_tables()
        self._w_table = tables["w"]
        self._w_cells = _bilinear_cells(self._w_table)
        self._h_cells = _bilinear_cells(tables["h"])
        volume_cells = _bilinear_cells(tables["v"])
        self._h_v_cells = np.vstack([self._h_cells, volume_cells])
        self._w_lines: dict[float, np.ndarray] = {}

    def _computed_tables(self) -> dict[str, np.ndarray]:
        """``HAPropsSI`` values on the grids: ``w`` = W(T, RH), ``h`` = h(T, W), ``v`` =
        v_da(T, W), each (temperatures, humidities)."""
        t = self.TEMPERATURE.values()
        t_rh = np.meshgrid(t, self.RELATIVE_HUMIDITY.values(), indexing="ij")
        t_w = np.meshgrid(t, self.HUMIDITY_RATIO.values(), indexing="ij")
        return {
            "w": self._exact.humidity_ratio(*t_rh),
            "h": self._exact.enthalpy(*t_w),
            "v": self._exact.dry_air_volume(*t_w),
        }

    def _cached_tables(self) -> dict[str, np.ndarray]:
        """:meth:`_computed_tables` from the disk cache, else computed and cached."""
        name = f"moist-air-{self.pressure:.0f}Pa-coolprop{COOLPROP_VERSION}-layout{self.LAYOUT}"
        path = cache_directory() / f"{name}.npz"
        tables = load_arrays(path)
        t, rh, w = self.TEMPERATURE.nodes, self.RELATIVE_HUMIDITY.nodes, self.HUMIDITY_RATIO.nodes
        shapes = {"w": (t, rh), "h": (t, w), "v": (t, w)}
        if tables is None or any(np.shape(tables.get(k)) != v for k, v in shapes.items()):
            tables = self._computed_tables()
            save_arrays(path, tables)
        return tables

    # ---- lookups at located temperatures ----

    def _checked(self, values, at_t: _Location, at_y: _Location, exact) -> np.ndarray:
        """NaN outside the tables, recomputed with ``HAPropsSI`` where the inputs are finite."""
        inside = at_t.inside & at_y.inside
        if not inside.all():
            outside = ~inside
            values[outside] = np.nan
            retry = outside & np.isfinite(at_t.samples) & np.isfinite(at_y.samples)
            if retry.any():
                values[retry] = exact(at_t.samples[retry], at_y.samples[retry])
        return values

    def _w_line(self, relative_humidity: float) -> np.ndarray:
        """W(T) at one relative humidity as per-cell (value, slope), shape (2, cells)."""
        line = self._w_lines.get(relative_humidity)
        if line is None:
            at = self.RELATIVE_HUMIDITY.locate(np.array([relative_humidity]))
            left = self._w_table[:, at.cell[0]]
            w = left + (self._w_table[:, at.cell[0] + 1] - left) * at.fraction[0]
            line = self._w_lines[relative_humidity] = np.vstack([w[:-1], np.diff(w)])
        return line

    def _humidity_ratio_at(self, at_t: _Location, relative_humidity) -> np.ndarray:
        rh = np.asarray(relative_humidity, float)
        if rh.ndim == 0 and 0.0 <= rh <= 1.0:  # one value: interpolate along a line of the table
            rows = self._w_line(float(rh)).take(at_t.cell, axis=1)
            values = rows[1] * at_t.fraction
            values += rows[0]
            at_rh = _Location(np.broadcast_to(rh, at_t.samples.shape), None, None, np.True_)
        else:
            at_rh = self.RELATIVE_HUMIDITY.locate(np.broadcast_to(rh, at_t.samples.shape))
            cells = at_t.cell * (self.RELATIVE_HUMIDITY.nodes - 1) + at_rh.cell
            values = _bilinear(self._w_cells.take(cells, axis=1), 0, at_t.fraction, at_rh.fraction)
        return self._checked(values, at_t, at_rh, self._exact.humidity_ratio)

    def _rows(self, cells: np.ndarray, at_t: _Location, at_w: _Location) -> np.ndarray:
        return cells.take(at_t.cell * (self.HUMIDITY_RATIO.nodes - 1) + at_w.cell, axis=1)

    def _enthalpy_at(self, at_t: _Location, at_w: _Location) -> np.ndarray:
        rows = self._rows(self._h_cells, at_t, at_w)
        values = _bilinear(rows, 0, at_t.fraction, at_w.fraction)
        return self._checked(values, at_t, at_w, self._exact.enthalpy)

    def _enthalpy_and_volume_at(self, at_t: _Location, at_w: _Location):
        rows = self._rows(self._h_v_cells, at_t, at_w)
        h = _bilinear(rows, 0, at_t.fraction, at_w.fraction)
        v = _bilinear(rows, 4, at_t.fraction, at_w.fraction)
        return (
            self._checked(h, at_t, at_w, self._exact.enthalpy),
            self._checked(v, at_t, at_w, self._exact.dry_air_volume),
        )

    # ---- the MoistAir interface ----

    def _located(self, temperature, other):
        shape = np.broadcast_shapes(np.shape(temperature), np.shape(other))
        return shape, self.TEMPERATURE.locate(_flat(temperature, shape)), _flat(other, shape)

    def humidity_ratio(self, temperature, relative_humidity):
        shape, at_t, rh = self._located(temperature, relative_humidity)
        return _shaped(self._humidity_ratio_at(at_t, rh), shape)

    def enthalpy(self, temperature, humidity_ratio):
        shape, at_t, w = self._located(temperature, humidity_ratio)
        return _shaped(self._enthalpy_at(at_t, self.HUMIDITY_RATIO.locate(w)), shape)

    def dry_air_volume(self, temperature, humidity_ratio):
        shape, at_t, w = self._located(temperature, humidity_ratio)
        _, volume = self._enthalpy_and_volume_at(at_t, self.HUMIDITY_RATIO.locate(w))
        return _shaped(volume, shape)

    def _evaporator_states(self, return_temp, return_rh, supply_temp, supply_rh, coil_leaving_rh):
        arrays = (return_temp, return_rh, supply_temp, supply_rh)
        shape = np.broadcast_shapes(*(np.shape(a) for a in arrays if a is not None))
        at_r = self.TEMPERATURE.locate(_flat(return_temp, shape))
        at_s = self.TEMPERATURE.locate(_flat(supply_temp, shape))
        w_r = self._humidity_ratio_at(at_r, _flat(return_rh, shape))
        if supply_rh is None:  # see supply_humidity_ratio
            w_s = np.fmin(w_r, self._humidity_ratio_at(at_s, coil_leaving_rh))
        else:
            w_s = self._humidity_ratio_at(at_s, _flat(supply_rh, shape))
        at_w_r, at_w_s = self.HUMIDITY_RATIO.locate(w_r), self.HUMIDITY_RATIO.locate(w_s)
        h_r, volume = self._enthalpy_and_volume_at(at_r, at_w_r)
        h_s = self._enthalpy_at(at_s, at_w_s)
        h_r_dry = self._enthalpy_at(at_r, at_w_s)
        return tuple(_shaped(x, shape) for x in (h_r, h_s, h_r_dry, volume))

    def _condenser_states(self, entering_temp, leaving_temp, entering_rh):
        shape = np.broadcast_shapes(np.shape(entering_temp), np.shape(leaving_temp))
        if np.ndim(entering_rh):
            shape = np.broadcast_shapes(shape, np.shape(entering_rh))
            entering_rh = _flat(entering_rh, shape)
        at_in = self.TEMPERATURE.locate(_flat(entering_temp, shape))
        at_out = self.TEMPERATURE.locate(_flat(leaving_temp, shape))
        at_w = self.HUMIDITY_RATIO.locate(self._humidity_ratio_at(at_in, entering_rh))
        h_in, volume = self._enthalpy_and_volume_at(at_in, at_w)
        h_out = self._enthalpy_at(at_out, at_w)
        return tuple(_shaped(x, shape) for x in (h_in, h_out, volume))


@lru_cache(maxsize=8)
def _tabulated(pressure: int) -> MoistAir:
    return _TabulatedMoistAir(pressure)


def supply_humidity_ratio(
    air: MoistAir,
    return_humidity_ratio,
    supply_temp,
    supply_rh=None,
    coil_leaving_rh=DEFAULT_COIL_LEAVING_RH,
):
    """Humidity ratio [kg/kg] of the air leaving the evaporator coil.

    A measured supply relative humidity [0-1] is used when given. Otherwise the wet-coil
    assumption: air leaves the coil at ``coil_leaving_rh`` (0.95 by default, common practice)
    where that holds less water than the entering air (the coil condenses), and with the entering
    humidity ratio where it does not (a dry coil removes no water).
    """
    if supply_rh is not None:
        return air.humidity_ratio(supply_temp, supply_rh)
    wet = air.humidity_ratio(supply_temp, coil_leaving_rh)
    return _out(np.fmin(np.asarray(return_humidity_ratio, float), wet))


def evaporator_air_capacity(
    return_temp,
    return_rh,
    supply_temp,
    airflow,
    pressure=STANDARD_PRESSURE,
    supply_rh=None,
    coil_leaving_rh=DEFAULT_COIL_LEAVING_RH,
    air: MoistAir | None = None,
) -> pd.DataFrame:
    """Evaporator capacity from the air side [4]: total, sensible and latent [W].

    .. math::

        \\dot m_{da} = \\dot V / v_{da}(T_r, W_r), \\quad
        Q_{total} = \\dot m_{da} (h(T_r, W_r) - h(T_s, W_s)),

        Q_{sensible} = \\dot m_{da} (h(T_r, W_s) - h(T_s, W_s)), \\quad
        Q_{latent} = Q_{total} - Q_{sensible}

    Parameters
    ----------
    return_temp, supply_temp : numeric
        Air temperature entering (return) and leaving (supply) the evaporator [K].
    return_rh : numeric
        Relative humidity of the entering air [0-1].
    airflow : numeric
        Volumetric airflow at the entering (return) air state [m^3/s].
    pressure : float
        Total air pressure [Pa] (the site's atmospheric pressure).
    supply_rh : numeric, optional
        Measured leaving relative humidity [0-1]; else see :func:`supply_humidity_ratio`.
    air : MoistAir, optional
        Property source; ``MoistAir(pressure)`` by default.

    Returns
    -------
    DataFrame
        Columns ``total``, ``sensible``, ``latent`` [W], ``sensible_heat_ratio`` [-],
        ``dry_air_mass_flow`` [kg/s].
    """
    air = air or MoistAir(pressure)
    h_r, h_s, h_r_dry, volume = air._evaporator_states(
        return_temp, return_rh, supply_temp, supply_rh, coil_leaving_rh
    )
    dry_air = np.atleast_1d(np.asarray(airflow, float) / volume)
    total = dry_air * (h_r - h_s)
    sensible = dry_air * (h_r_dry - h_s)
    with np.errstate(divide="ignore", invalid="ignore"):
        shr = sensible / total
    return pd.DataFrame(
        {
            "total": total,
            "sensible": sensible,
            "latent": total - sensible,
            "sensible_heat_ratio": shr,
            "dry_air_mass_flow": np.broadcast_to(dry_air, np.shape(total)),
        }
    )


def condenser_air_temperature_rise(leaving_air_temp, entering_air_temp):
    """Condenser air temperature rise [K]: leaving minus entering (outdoor) air temperature."""
    return _out(np.asarray(leaving_air_temp, float) - np.asarray(entering_air_temp, float))


def virtual_evaporator_airflow(
    capacity,
    return_temp,
    return_rh,
    supply_temp,
    pressure=STANDARD_PRESSURE,
    supply_rh=None,
    coil_leaving_rh=DEFAULT_COIL_LEAVING_RH,
    air: MoistAir | None = None,
):
    """Evaporator airflow [m^3/s at the return state] that carries the refrigerant-side capacity.

    The air-side balance of :func:`evaporator_air_capacity` solved for the airflow:
    V = Q v_da(T_r, W_r) / (h_r - h_s), with Q the refrigerant-side cooling capacity [W]. NaN
    where the air is not cooled.
    """
    air = air or MoistAir(pressure)
    h_r, h_s, _, volume = air._evaporator_states(
        return_temp, return_rh, supply_temp, supply_rh, coil_leaving_rh
    )
    return _airflow(capacity, volume, h_r - h_s)


def _airflow(heat_rate, volume, enthalpy_change):
    with np.errstate(divide="ignore", invalid="ignore"):
        flow = np.asarray(heat_rate, float) * volume / enthalpy_change
    return _out(np.where(enthalpy_change > 0, flow, np.nan))


def virtual_condenser_airflow(
    heat_rejection_rate,
    entering_air_temp,
    leaving_air_temp,
    pressure=STANDARD_PRESSURE,
    entering_rh=0.5,
    air: MoistAir | None = None,
):
    """Condenser airflow [m^3/s at the entering state] that carries the heat rejection.

    Sensible heating at constant humidity ratio: V = Q v_da / (h(T_leave, W) - h(T_enter, W)).
    ``entering_rh`` [0-1] defaults to 0.5 where outdoor humidity is not measured; it changes the
    result by well under 1 % (moist-air heat capacity varies little with humidity).
    """
    air = air or MoistAir(pressure)
    h_in, h_out, volume = air._condenser_states(entering_air_temp, leaving_air_temp, entering_rh)
    return _airflow(heat_rejection_rate, volume, h_out - h_in)


# ---------------------------------------------------------------------------------------------
# Charge
# ---------------------------------------------------------------------------------------------

EXPANSION_DEVICES = ("txv", "eev", "fixed_orifice")


@dataclass(frozen=True)
class ChargeModel:
    """Virtual refrigerant-charge sensor after Li and Braun [5].

    .. math::

        \\Delta_{charge} = k_{sc} (T_{sc} - T_{sc,rated}) - k_{sh} (T_{sh} - T_{sh,rated})

    the charge deviation as a fraction of the rated (correct) charge: 0 at rated charge, -0.25
    for a circuit 25 % short. Low charge lowers subcooling (less liquid backs up in the condenser)
    and, with a fixed orifice, raises superheat (the evaporator is starved), so both terms go
    negative. The coefficients are unit-specific: set them from the manufacturer or commissioning
    data, or calibrate them with :func:`calibrate_charge_model`.

    Forms: ``fixed_orifice`` uses both terms. ``txv``/``eev``: the valve holds superheat near its
    setpoint, so the charge shows in subcooling; ``k_superheat`` is 0 unless set or calibrated
    (then it captures the rise of superheat once a short circuit drives the valve wide open).

    Attributes
    ----------
    expansion_device : ``"txv"``, ``"eev"`` or ``"fixed_orifice"``.
    k_subcooling : k_sc [1/K], charge fraction per kelvin of subcooling.
    k_superheat : k_sh [1/K], charge fraction per kelvin of superheat.
    rated_subcooling, rated_superheat : subcooling and superheat at rated charge [K].
    """

    expansion_device: str
    k_subcooling: float
    rated_subcooling: float
    rated_superheat: float
    k_superheat: float = 0.0

    def __post_init__(self):
        if self.expansion_device not in EXPANSION_DEVICES:
            raise ValueError(
                f"expansion_device: {self.expansion_device!r} is not one of "
                f"{', '.join(EXPANSION_DEVICES)}"
            )
        for name in ("k_subcooling", "k_superheat", "rated_subcooling", "rated_superheat"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise ValueError(f"{name}: not a number ({value!r})")
            if not np.isfinite(value):
                raise ValueError(f"{name}: not finite ({value!r})")
        if self.k_subcooling <= 0:
            raise ValueError(f"k_subcooling: must be positive, got {self.k_subcooling}")
        if self.k_superheat < 0:
            raise ValueError(f"k_superheat: must not be negative, got {self.k_superheat}")

    def deviation(self, subcooling, superheat):
        """Charge deviation [-] (fraction of rated charge) per sample; see the class formula."""
        return charge_deviation(self, subcooling, superheat)


def charge_deviation(model: ChargeModel, subcooling, superheat):
    """Charge deviation [-] from subcooling and superheat [K] per :class:`ChargeModel` [5]."""
    sc = np.asarray(subcooling, float) - model.rated_subcooling
    sh = np.asarray(superheat, float) - model.rated_superheat
    return _out(model.k_subcooling * sc - model.k_superheat * sh)


def calibrate_charge_model(
    subcooling,
    superheat,
    charge_fraction,
    expansion_device: str,
    k_subcooling: float | None = None,
    k_superheat: float | None = None,
) -> ChargeModel:
    """Fit a :class:`ChargeModel` to periods of known charge by least squares [5].

    Parameters
    ----------
    subcooling, superheat : array-like
        Samples [K] from steady operation at known charge.
    charge_fraction : array-like or float
        The known charge of each sample as a fraction of the rated charge (1.0 = correct).
    expansion_device : ``"txv"``, ``"eev"`` or ``"fixed_orifice"``.
    k_subcooling, k_superheat : float, optional
        Keep these coefficients rather than fit them.

    With data at one charge level only (typically a period right after a verified charge), the
    sensitivities cannot be learned: ``k_subcooling`` (and for a fixed orifice ``k_superheat``) must
    be given and only the rated subcooling and superheat are set, to the period's means. With two
    or more charge levels the missing coefficients are fitted from
    ``charge - 1 = c0 + k_sc SC - k_sh SH`` (for txv/eev without the superheat term unless
    ``k_superheat`` is given) and the rated values placed on the fitted zero line at the mean
    superheat of the data.
    """
    sc = np.asarray(subcooling, float).reshape(-1)
    sh = np.asarray(superheat, float).reshape(-1)
    charge = np.broadcast_to(np.asarray(charge_fraction, float), sc.shape)
    good = np.isfinite(sc) & np.isfinite(sh) & np.isfinite(charge)
    if good.sum() < 3:
        raise ValueError(
            "charge calibration needs at least 3 samples with subcooling and superheat"
        )
    sc, sh, target = sc[good], sh[good], charge[good] - 1.0
    uses_superheat = expansion_device == "fixed_orifice" or k_superheat is not None
    if np.ptp(target) == 0:
        missing = [
            name
            for name, value, needed in (
                ("k_subcooling", k_subcooling, True),
                ("k_superheat", k_superheat, expansion_device == "fixed_orifice"),
            )
            if needed and value is None
        ]
        if missing:
            raise ValueError(
                f"all samples are at one charge level: give {' and '.join(missing)} "
                "(only the rated subcooling and superheat can be learned from one level)"
            )
        k_sc, k_sh = k_subcooling, k_superheat or 0.0
        # place the zero of the deviation at the period's means, shifted for a known off-charge
        offset = target[0]
        return ChargeModel(
            expansion_device,
            k_sc,
            rated_subcooling=float(sc.mean() - offset / k_sc),
            rated_superheat=float(sh.mean()),
            k_superheat=k_sh,
        )
    columns = [np.ones_like(sc)]
    known = np.zeros_like(sc)
    if k_subcooling is None:
        columns.append(sc)
    else:
        known += k_subcooling * sc
    if uses_superheat:
        if k_superheat is None:
            columns.append(-sh)
        else:
            known -= k_superheat * sh
    solution, *_ = np.linalg.lstsq(np.column_stack(columns), target - known, rcond=None)
    intercept, fitted = solution[0], list(solution[1:])
    k_sc = k_subcooling if k_subcooling is not None else fitted.pop(0)
    k_sh = (k_superheat if k_superheat is not None else fitted.pop(0)) if uses_superheat else 0.0
    if k_sc <= 0:
        raise ValueError(
            "calibration gave a non-positive subcooling coefficient: the data do not show "
            "subcooling rising with charge (check steady-state selection and sensors)"
        )
    k_sh = max(float(k_sh), 0.0)
    rated_superheat = float(sh.mean())
    # zero line: intercept + k_sc SC0 - k_sh SH0 = 0
    rated_subcooling = (k_sh * rated_superheat - intercept) / k_sc
    return ChargeModel(
        expansion_device,
        float(k_sc),
        rated_subcooling=float(rated_subcooling),
        rated_superheat=rated_superheat,
        k_superheat=k_sh,
    )


# ---------------------------------------------------------------------------------------------
# All virtual sensors for a cycle_states frame
# ---------------------------------------------------------------------------------------------

#: Output columns of :func:`compute`, their units and meaning.
COLUMNS: dict[str, tuple[str, str]] = {
    "mass_flow_map": ("kg/s", "from the compressor map, density-corrected (Dabiri and Rice)"),
    "mass_flow_balance": ("kg/s", "from the compressor energy balance with measured power"),
    "mass_flow": ("kg/s", "the mass flow used below: map if available, else energy balance"),
    "volumetric_efficiency_ratio": ("-", "mass_flow_balance / mass_flow_map"),
    "compressor_power": ("W", "measured input power, else the map's"),
    "compressor_current_map": ("A", "current from the map"),
    "cooling_capacity": ("W", "mass_flow (h1 - h4)"),
    "heat_rejection": ("W", "mass_flow (h2 - h3)"),
    "compressor_heat_loss": ("W", "compressor_power - mass_flow (h2 - h1)"),
    "cop": ("-", "cooling_capacity / compressor_power"),
    "cooling_capacity_btu_h": ("Btu/h", "cooling_capacity in Btu/h"),
    "cooling_capacity_tons": ("ton", "cooling_capacity in tons of refrigeration"),
    "eer": ("Btu/(W h)", "energy efficiency ratio, cooling_capacity_btu_h / compressor_power"),
    "charge_deviation": ("-", "charge deviation, fraction of rated charge (Li and Braun)"),
    "evaporator_capacity_air": ("W", "air-side total evaporator capacity"),
    "evaporator_sensible_capacity_air": ("W", "air-side sensible evaporator capacity"),
    "evaporator_latent_capacity_air": ("W", "air-side latent evaporator capacity"),
    "condenser_air_temp_rise": ("K", "condenser leaving minus entering air temperature"),
    "virtual_evaporator_airflow": ("m^3/s", "evaporator airflow from the refrigerant capacity"),
    "virtual_condenser_airflow": ("m^3/s", "condenser airflow from the heat rejection"),
    "flags": ("", "reasons a virtual sensor is missing or doubtful; empty when sound"),
}

#: The numeric columns of :data:`COLUMNS` (all but ``flags``), in order.
VALUE_COLUMNS: tuple[str, ...] = tuple(name for name in COLUMNS if name != "flags")
_ROW = {name: k for k, name in enumerate(VALUE_COLUMNS)}

# Per-sample flags: bit -> readable reason.
OUTSIDE_MAP_ENVELOPE = 1 << 0
POWER_NOT_POSITIVE = 1 << 1
NO_ENTHALPY_RISE = 1 << 2
FLAG_REASONS = {
    OUTSIDE_MAP_ENVELOPE: "outside the compressor map envelope",
    POWER_NOT_POSITIVE: "compressor power missing or not positive",
    NO_ENTHALPY_RISE: "no enthalpy rise across the compressor: energy-balance mass flow unusable",
}


@dataclass(frozen=True)
class AirReadings:
    """Air-side readings for :func:`compute`; all optional, SI (K, relative humidity 0-1, m^3/s).

    Airflows, when known, usually come from the unit description (design or commissioning values).
    """

    return_air_temp: object = None
    return_air_humidity: object = None
    supply_air_temp: object = None
    supply_air_humidity: object = None
    outdoor_air_temp: object = None
    condenser_leaving_air_temp: object = None
    evaporator_airflow: object = None
    pressure: float = STANDARD_PRESSURE


def _column(values, n: int) -> np.ndarray | None:
    if values is None:
        return None
    array = np.asarray(values, dtype=float)
    return np.full(n, float(array)) if array.ndim == 0 else array.reshape(-1)


def compute(
    states: pd.DataFrame,
    suction_pressure,
    compressor_map: CompressorMap | None = None,
    compressor_power=None,
    compressor_speed=None,
    shell_loss_fraction: float = DEFAULT_SHELL_LOSS_FRACTION,
    charge_model: ChargeModel | None = None,
    air: AirReadings | None = None,
    extrapolate: bool = False,
    air_tables: bool | None = None,
) -> pd.DataFrame:
    """All virtual sensors for a frame of :func:`rimewatch.physics.cycle.cycle_states`.

    Parameters
    ----------
    states : DataFrame
        Output of ``cycle_states`` (uses t_evap, t_cond, superheat, subcooling, h1 .. h4).
    suction_pressure : numeric or array-like
        The suction pressure [Pa] the states were computed from (for the suction density).
    compressor_map : CompressorMap, optional
        Gives mass flow (and power and current where the map has them).
    compressor_power : numeric or array-like, optional
        Measured compressor input power [W]; gives the energy-balance mass flow.
    compressor_speed : numeric or array-like, optional
        Compressor speed [Hz], for variable-speed maps.
    shell_loss_fraction : float
        See :func:`energy_balance_mass_flow`.
    charge_model : ChargeModel, optional
        Adds ``charge_deviation``.
    air : AirReadings, optional
        Adds the air-side columns the readings allow.
    extrapolate : bool
        Evaluate the map outside its envelope too (such samples are flagged either way).
    air_tables : bool, optional
        Moist-air properties from :meth:`MoistAir.tabulated` (True) or directly from ``HAPropsSI``
        (False); by default the tables above 1000 samples, where the direct calls dominate.

    Returns
    -------
    DataFrame
        The columns of :data:`COLUMNS`, same index as ``states``; NaN where inputs are missing.
    """
    values, flags = _compute_values(
        states,
        suction_pressure,
        compressor_map,
        compressor_power,
        compressor_speed,
        shell_loss_fraction,
        charge_model,
        air,
        extrapolate,
        air_tables,
    )
    frame = pd.DataFrame(values.T, index=states.index, columns=VALUE_COLUMNS, copy=False)
    frame["flags"] = _flag_text(flags)
    return frame


def compute_arrays(states, suction_pressure, **options) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """:func:`compute` without the frames, for callers that go on with arrays.

    ``states`` maps the columns of ``cycle_states`` to values: a frame, or the columns of
    :func:`rimewatch.physics.cycle.cycle_arrays`; ``options`` are those of :func:`compute`.
    Returns column of :data:`VALUE_COLUMNS` -> values, and the flag bits (:data:`FLAG_REASONS`).
    """
    values, flags = _compute_values(states, suction_pressure, **options)
    return dict(zip(VALUE_COLUMNS, values, strict=True)), flags


def _compute_values(
    states,
    suction_pressure,
    compressor_map: CompressorMap | None = None,
    compressor_power=None,
    compressor_speed=None,
    shell_loss_fraction: float = DEFAULT_SHELL_LOSS_FRACTION,
    charge_model: ChargeModel | None = None,
    air: AirReadings | None = None,
    extrapolate: bool = False,
    air_tables: bool | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Values, shape (len(VALUE_COLUMNS), n), and flag bits of :func:`compute`."""
    names = ["t_evap", "t_cond", "h1", "h2", "h3", "h4"]
    names += ["superheat"] if compressor_map is not None else []
    names += ["subcooling", "superheat"] if charge_model is not None else []
    inputs = {name: np.asarray(states[name], dtype=float) for name in names}
    n = len(inputs["t_evap"])
    inputs["suction_pressure"] = _column(suction_pressure, n)
    inputs["power"] = _column(compressor_power, n)
    inputs["speed"] = _column(compressor_speed, n)
    moist = None
    if air is not None:
        tables = n > 1000 if air_tables is None else air_tables
        moist = MoistAir.tabulated(air.pressure) if tables else MoistAir(air.pressure)
        for field in fields(AirReadings):
            if field.name != "pressure":
                inputs[field.name] = _column(getattr(air, field.name), n)
    out = np.full((len(VALUE_COLUMNS), n), np.nan)
    flags = np.zeros(n, dtype=np.int64)
    settings = (compressor_map, shell_loss_fraction, charge_model, extrapolate)
    for start in range(0, n, BLOCK_SAMPLES):
        block = slice(start, start + BLOCK_SAMPLES)
        part = {name: None if values is None else values[block] for name, values in inputs.items()}
        values, flags[block] = _refrigerant_side(part, *settings)
        if moist is not None:
            values.update(
                _air_side(part, moist, values["cooling_capacity"], values["heat_rejection"])
            )
        for column, array in values.items():
            out[_ROW[column], block] = array
    return out, flags


def _refrigerant_side(
    part: dict, compressor_map, shell_loss_fraction, charge_model, extrapolate
) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Refrigerant-side virtual sensors and flag bits of one block of samples."""
    t_evap, t_cond, speed = part["t_evap"], part["t_cond"], part["speed"]
    h1, h2, h3, h4 = part["h1"], part["h2"], part["h3"], part["h4"]
    flags = np.zeros(len(t_evap), dtype=np.int64)
    missing = np.full(len(t_evap), np.nan)
    out = {"mass_flow_map": missing, "compressor_power": missing, "mass_flow_balance": missing}
    if compressor_map is not None:
        inside = compressor_map.in_envelope(t_evap, t_cond, speed)
        known = np.isfinite(t_evap) & np.isfinite(t_cond)
        flags[known & ~inside] |= OUTSIDE_MAP_ENVELOPE
        keep = inside | extrapolate
        suction_temp = t_evap + part["superheat"]
        flow = map_mass_flow(
            compressor_map, part["suction_pressure"], t_evap, t_cond, suction_temp, speed, True
        )
        out["mass_flow_map"] = np.where(keep, flow, np.nan)
        for quantity, column in (
            ("power", "compressor_power"),
            ("current", "compressor_current_map"),
        ):
            if quantity in compressor_map.coefficients:
                values = compressor_map.evaluate(quantity, t_evap, t_cond, speed, extrapolate=True)
                out[column] = np.where(keep, values, np.nan)
    power = part["power"]
    if power is not None:
        flags[~(power > 0)] |= POWER_NOT_POSITIVE
        out["compressor_power"] = np.where(np.isfinite(power), power, out["compressor_power"])
        out["mass_flow_balance"] = energy_balance_mass_flow(power, h1, h2, shell_loss_fraction)
        flags[(power > 0) & ~(h2 > h1)] |= NO_ENTHALPY_RISE
    out["volumetric_efficiency_ratio"] = volumetric_efficiency_ratio(
        out["mass_flow_balance"], out["mass_flow_map"]
    )
    mass_flow = np.where(
        np.isfinite(out["mass_flow_map"]), out["mass_flow_map"], out["mass_flow_balance"]
    )
    out["mass_flow"] = mass_flow
    capacity = cooling_capacity(mass_flow, h1, h4)
    out["cooling_capacity"] = capacity
    out["heat_rejection"] = heat_rejection(mass_flow, h2, h3)
    out["compressor_heat_loss"] = compressor_heat_loss(out["compressor_power"], mass_flow, h1, h2)
    out["cop"] = coefficient_of_performance(capacity, out["compressor_power"])
    out["cooling_capacity_btu_h"] = btu_per_hour(capacity)
    out["cooling_capacity_tons"] = tons_of_refrigeration(capacity)
    out["eer"] = energy_efficiency_ratio(capacity, out["compressor_power"])
    if charge_model is not None:
        out["charge_deviation"] = charge_model.deviation(part["subcooling"], part["superheat"])
    return out, flags


def _air_side(part: dict, moist: MoistAir, capacity, rejection) -> dict[str, np.ndarray]:
    """Air-side virtual sensors of one block of samples, as far as the readings allow."""
    out = {}
    t_r, rh_r, t_s = part["return_air_temp"], part["return_air_humidity"], part["supply_air_temp"]
    if t_r is not None and rh_r is not None and t_s is not None:
        h_r, h_s, h_r_dry, volume = moist._evaporator_states(
            t_r, rh_r, t_s, part["supply_air_humidity"], DEFAULT_COIL_LEAVING_RH
        )
        airflow = part["evaporator_airflow"]
        if airflow is not None:
            dry_air = airflow / volume
            out["evaporator_capacity_air"] = dry_air * (h_r - h_s)
            out["evaporator_sensible_capacity_air"] = dry_air * (h_r_dry - h_s)
            out["evaporator_latent_capacity_air"] = dry_air * (h_r - h_r_dry)
        out["virtual_evaporator_airflow"] = _airflow(capacity, volume, h_r - h_s)
    t_in, t_out = part["outdoor_air_temp"], part["condenser_leaving_air_temp"]
    if t_in is not None and t_out is not None:
        out["condenser_air_temp_rise"] = condenser_air_temperature_rise(t_out, t_in)
        out["virtual_condenser_airflow"] = virtual_condenser_airflow(
            rejection, t_in, t_out, air=moist
        )
    return out


def _flag_text(flags: np.ndarray) -> np.ndarray:
    """Readable reasons per sample from the flag bits (one text per bit combination)."""
    texts = np.array(
        [
            "; ".join(reason for bit, reason in FLAG_REASONS.items() if mask & bit)
            for mask in range(2 * max(FLAG_REASONS))
        ],
        dtype=object,
    )
    return texts.take(flags)
