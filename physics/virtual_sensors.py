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

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pandas as pd
from CoolProp.HumidAirProp import HAPropsSI

from rimewatch.physics import fast
from rimewatch.physics.compressor import CompressorMap, density_corrected_mass_flow

STANDARD_PRESSURE = 101325.0  # Pa
WATTS_PER_BTU_PER_HOUR = 1055.05585262 / 3600.0  # International Table Btu, exact
WATTS_PER_TON = 12000.0 * WATTS_PER_BTU_PER_HOUR  # ton of refrigeration = 12 000 Btu/h
# Heat a hermetic compressor shell loses to its surroundings, as a fraction of its input power.
# Common practice for hermetic compressors in moving air is 5-10 %; calibrate per unit when the
# refrigerant mass flow can be measured once.
DEFAULT_SHELL_LOSS_FRACTION = 0.05
# Air leaving a wet cooling coil is close to, but not at, saturation (common practice 90-95 %RH).
DEFAULT_COIL_LEAVING_RH = 0.95


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
    fluid = compressor_map.refrigerant
    m_map = compressor_map.mass_flow(t_evap, t_cond, speed, extrapolate)
    rated_temp = compressor_map.rated_suction_temperature(t_evap)
    rho = fast.density(fluid, suction_pressure, suction_temp)
    rho_rated = fast.density(fluid, suction_pressure, rated_temp)
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
    humidity, 0.0025 kg/kg in humidity ratio over -40 to +60 degC), about 1000 times faster, for
    long series; samples outside the tables are computed directly.
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


class _TabulatedMoistAir(MoistAir):
    T_AXIS = np.arange(-40.0, 60.001, 0.5) + 273.15
    RH_AXIS = np.linspace(0.0, 1.0, 21)
    W_AXIS = np.linspace(0.0, 0.05, 21)

    def __init__(self, pressure):
        super().__init__(pressure)
        exact = MoistAir(pressure)
        t_rh = np.meshgrid(self.T_AXIS, self.RH_AXIS, indexing="ij")
        t_w = np.meshgrid(self.T_AXIS, self.W_AXIS, indexing="ij")
        self._w = exact.humidity_ratio(*t_rh)
        self._h = exact.enthalpy(*t_w)
        self._v = exact.dry_air_volume(*t_w)
        self._exact = exact

    def _lookup(self, table, y_axis, x, y, fallback):
        x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
        nx, ny = table.shape
        fx = (x - self.T_AXIS[0]) * (1.0 / (self.T_AXIS[1] - self.T_AXIS[0]))
        fy = (y - y_axis[0]) * (1.0 / (y_axis[1] - y_axis[0]))
        inside = (fx >= 0) & (fx <= nx - 1) & (fy >= 0) & (fy <= ny - 1)
        i = np.minimum(np.where(inside, fx, 0).astype(np.intp), nx - 2)
        j = np.minimum(np.where(inside, fy, 0).astype(np.intp), ny - 2)
        u, v = fx - i, fy - j
        flat = table.ravel()
        k = i * ny + j
        low = flat[k] + (flat[k + ny] - flat[k]) * u
        high = flat[k + 1] + (flat[k + ny + 1] - flat[k + 1]) * u
        out = np.asarray(low + (high - low) * v)
        outside = ~inside
        if outside.any():
            out[outside] = np.nan
            retry = outside & np.isfinite(x) & np.isfinite(y)
            if retry.any():
                out[retry] = fallback(x[retry], y[retry])
        return _out(out)

    def humidity_ratio(self, temperature, relative_humidity):
        return self._lookup(
            self._w, self.RH_AXIS, temperature, relative_humidity, self._exact.humidity_ratio
        )

    def enthalpy(self, temperature, humidity_ratio):
        return self._lookup(self._h, self.W_AXIS, temperature, humidity_ratio, self._exact.enthalpy)

    def dry_air_volume(self, temperature, humidity_ratio):
        return self._lookup(
            self._v, self.W_AXIS, temperature, humidity_ratio, self._exact.dry_air_volume
        )


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


def _evaporator_states(air, return_temp, return_rh, supply_temp, supply_rh, coil_leaving_rh):
    """Entering/leaving humidity ratios, the enthalpies the balances need, entering v_da."""
    w_r = np.asarray(air.humidity_ratio(return_temp, return_rh), float)
    w_s = np.asarray(
        supply_humidity_ratio(air, w_r, supply_temp, supply_rh, coil_leaving_rh), float
    )
    h_r = air.enthalpy(return_temp, w_r)
    h_s = air.enthalpy(supply_temp, w_s)
    h_r_dry = air.enthalpy(return_temp, w_s)  # entering temperature, leaving humidity
    return h_r, h_s, h_r_dry, air.dry_air_volume(return_temp, w_r)


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
    h_r, h_s, h_r_dry, volume = _evaporator_states(
        air, return_temp, return_rh, supply_temp, supply_rh, coil_leaving_rh
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
    h_r, h_s, _, volume = _evaporator_states(
        air, return_temp, return_rh, supply_temp, supply_rh, coil_leaving_rh
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
    w = air.humidity_ratio(entering_air_temp, entering_rh)
    rise = air.enthalpy(leaving_air_temp, w) - air.enthalpy(entering_air_temp, w)
    return _airflow(heat_rejection_rate, air.dry_air_volume(entering_air_temp, w), rise)


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

    Returns
    -------
    DataFrame
        The columns of :data:`COLUMNS`, same index as ``states``; NaN where inputs are missing.
    """
    n = len(states)
    flags = np.zeros(n, dtype=np.int64)
    t_evap = states["t_evap"].to_numpy()
    t_cond = states["t_cond"].to_numpy()
    h1, h2 = states["h1"].to_numpy(), states["h2"].to_numpy()
    h3, h4 = states["h3"].to_numpy(), states["h4"].to_numpy()
    out: dict[str, np.ndarray] = {column: np.full(n, np.nan) for column in COLUMNS}

    speed = _column(compressor_speed, n)
    if compressor_map is not None:
        suction_temp = t_evap + states["superheat"].to_numpy()
        inside = compressor_map.in_envelope(t_evap, t_cond, speed)
        known = np.isfinite(t_evap) & np.isfinite(t_cond)
        flags[known & ~inside] |= OUTSIDE_MAP_ENVELOPE
        keep = inside | extrapolate
        flow = map_mass_flow(
            compressor_map, _column(suction_pressure, n), t_evap, t_cond, suction_temp, speed, True
        )
        out["mass_flow_map"] = np.where(keep, flow, np.nan)
        for quantity, column in (
            ("power", "compressor_power"),
            ("current", "compressor_current_map"),
        ):
            if quantity in compressor_map.coefficients:
                values = compressor_map.evaluate(quantity, t_evap, t_cond, speed, extrapolate=True)
                out[column] = np.where(keep, values, np.nan)
    if compressor_power is not None:
        power = _column(compressor_power, n)
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
        out["charge_deviation"] = charge_model.deviation(
            states["subcooling"].to_numpy(), states["superheat"].to_numpy()
        )
    if air is not None:
        _air_side(out, air, n, capacity)
    out["flags"] = _flag_text(flags)
    frame = pd.DataFrame(out, index=states.index, copy=False)
    return frame


def _air_side(out: dict, air: AirReadings, n: int, capacity: np.ndarray) -> None:
    moist = MoistAir.tabulated(air.pressure) if n > 1000 else MoistAir(air.pressure)
    t_r = _column(air.return_air_temp, n)
    rh_r = _column(air.return_air_humidity, n)
    t_s = _column(air.supply_air_temp, n)
    rh_s = _column(air.supply_air_humidity, n)
    if t_r is not None and rh_r is not None and t_s is not None:
        h_r, h_s, h_r_dry, volume = _evaporator_states(
            moist, t_r, rh_r, t_s, rh_s, DEFAULT_COIL_LEAVING_RH
        )
        if air.evaporator_airflow is not None:
            dry_air = _column(air.evaporator_airflow, n) / volume
            out["evaporator_capacity_air"] = dry_air * (h_r - h_s)
            out["evaporator_sensible_capacity_air"] = dry_air * (h_r_dry - h_s)
            out["evaporator_latent_capacity_air"] = dry_air * (h_r - h_r_dry)
        out["virtual_evaporator_airflow"] = _airflow(capacity, volume, h_r - h_s)
    t_in = _column(air.outdoor_air_temp, n)
    t_out = _column(air.condenser_leaving_air_temp, n)
    if t_in is not None and t_out is not None:
        out["condenser_air_temp_rise"] = condenser_air_temperature_rise(t_out, t_in)
        out["virtual_condenser_airflow"] = virtual_condenser_airflow(
            out["heat_rejection"], t_in, t_out, air.pressure, air=moist
        )


def _flag_text(flags: np.ndarray) -> np.ndarray:
    masks, inverse = np.unique(flags, return_inverse=True)
    texts = np.array(
        ["; ".join(r for bit, r in FLAG_REASONS.items() if int(m) & bit) for m in masks],
        dtype=object,
    )
    return texts[inverse]
