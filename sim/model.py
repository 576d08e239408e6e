"""Quasi-steady model of an air-cooled vapour-compression unit, solved for many minutes at once.

Unknowns per sample: evaporating dew point ``t_evap`` [K], condensing dew point ``t_cond`` [K]
(the refrigerant's own saturation; non-condensable gas adds its partial pressure on top),
evaporator-outlet state ``y`` [K] (the superheat when >= 0; a wet outlet below 0, with quality
1 + y c_p,v / h_fg) and condenser-outlet state ``z`` [K] (the subcooling when >= 0; two-phase below
0, with h = h_liquid - c_p,l z). Four balances close them:

1. evaporator: the air side of its two-phase zone gives what the refrigerant takes;
2. condenser: the air side of its desuperheating and two-phase zone takes what the refrigerant
   gives (the desuperheating gas is lumped with the two-phase zone at the condensing temperature:
   our documented simplification, it under-states the zone's temperature difference slightly);
3. charge: the refrigerant held in the coils and lines equals the charge;
4. expansion device: a thermostatic or electronic valve holds its superheat while its largest
   opening passes the compressor's flow, else it is wide open and acts as an orifice (starved);
   a fixed orifice passes what the orifice equation gives.

Components
----------
* Compressor: AHRI 540 map [1] with the Dabiri-Rice suction-density correction [2].
* Coils: epsilon-NTU with a constant-temperature refrigerant stream, so
  epsilon = 1 - exp(-NTU) [3]. Each coil's zones share its face area and air flow; a superheating
  or subcooling zone has the refrigerant as its small capacity stream, so its length follows from
  the superheat or subcooling it makes.
* Wet evaporator: the effective-enthalpy method of Braun, Klein and Mitchell [4] (enthalpy
  potential, NTU scaled by c_p,a / c_s with c_s the saturated-air enthalpy slope), taking the dry
  or the wet result, whichever is larger, as they recommend. Leaving air follows the coil's
  apparatus dew point and bypass factor exp(-NTU_o) with NTU_o the air-side NTU [5].
* Charge: liquid, vapour and two-phase zones; two-phase mean density with Zivi's void fraction [6]
  averaged over the zone's quality range by 4-point Gauss-Legendre quadrature.
* Orifice flow: m = Cd A sqrt(2 rho_in dp). For a fixed orifice the flow is choked: following
  Aaron and Domanski [7], it depends mostly on the upstream pressure and subcooling, so the
  downstream pressure is replaced by p_e + beta (p_flash - p_e), p_flash the saturation pressure of
  the entering liquid; beta = 0.6 is our model constant, not a published value. Two-phase inlet
  flow uses the homogeneous density.

Newton iterations with a forward-difference Jacobian run over all samples as numpy arrays
(batched 4x4 solves), with a step limit and a backtracking line search; samples that converge drop
out. A sample that does not converge within the iteration limit, or whose solution sits on a
bound, is reported as not converged (its values are NaN), never replaced by a guess.

References
----------
.. [1] AHRI Standard 540-2020, compressor performance polynomial.
.. [2] Dabiri, A. E., Rice, C. K. (1981). "A compressor simulation model with corrections for the
   level of suction gas superheat." ASHRAE Transactions 87(2): 771-782.
.. [3] Incropera, F. P., DeWitt, D. P. (2002). "Fundamentals of Heat and Mass Transfer", 5th ed.,
   Wiley, section 11.4 (epsilon = 1 - exp(-NTU) when C_r = 0).
.. [4] Braun, J. E., Klein, S. A., Mitchell, J. W. (1989). "Effectiveness models for cooling
   towers and cooling coils." ASHRAE Transactions 95(2): 164-174.
.. [5] ASHRAE Handbook - HVAC Systems and Equipment (2020), ch. 23 "Air-cooling and dehumidifying
   coils": apparatus dew point and bypass factor.
.. [6] Zivi, S. M. (1964). "Estimation of steady-state steam void-fraction by means of the principle
   of minimum entropy production." Journal of Heat Transfer 86(2): 247-252.
.. [7] Aaron, D. A., Domanski, P. A. (1990). "Experimentation, analysis, and correlation of
   refrigerant-22 flow through short tube restrictors." ASHRAE Transactions 96(1): 729-742.
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from rimewatch.physics.compressor import ahri540
from rimewatch.sim.properties import AIR_GRID, bilerp, lerp

RATED_SUPERHEAT_K = 100.0 / 9.0  # AHRI 540 rating suction superheat, 20 degF [1]
SHELL_LOSS_FRACTION = 0.05  # share of compressor input lost from the shell (common practice)
CP_AIR = 1006.0  # J/(kg K), dry air near room temperature (ASHRAE Fundamentals ch. 1)
DENSITY_CORRECTION = 0.75  # F_v of Dabiri and Rice [2]
ORIFICE_CHOKE = 0.6  # beta, see the module docstring
AIRFLOW_EXPONENT = 0.6  # UA ~ airflow^0.6 on the air side (common practice, finned-tube coils)
SUBCOOLING_UA_SHARE = 0.5  # subcooled liquid's lower inside coefficient halves its zone's UA
AIR_SIDE_SHARE = 0.7  # share of a coil's thermal resistance on the air side (common practice)
HEAD_PRESSURE_BAND_K = 5.0  # fan speed rises from its minimum to full over this band
HEAD_PRESSURE_MIN_FAN = 0.15
_GAUSS_NODES = np.array([-0.8611363116, -0.3399810436, 0.3399810436, 0.8611363116])
_GAUSS_WEIGHTS = np.array([0.3478548451, 0.6521451549, 0.6521451549, 0.3478548451]) / 2.0

# residual scales: percent of nominal capacity, percent of charge, kelvin
TOLERANCE = 2e-3
MAX_STEP = np.array([3.0, 3.0, 4.0, 4.0])


@dataclass
class Conditions:
    """Boundary conditions and fault modifiers per sample (numpy arrays of one length, SI).

    Fault modifiers are 1 (multipliers) or 0 (added effects) when healthy.
    """

    outdoor_temp: np.ndarray  # K, condenser entering air
    outdoor_w: np.ndarray  # kg/kg, its humidity ratio
    return_temp: np.ndarray  # K, evaporator entering air
    return_w: np.ndarray  # kg/kg
    charge_factor: np.ndarray  # charge / design charge
    condenser_airflow_factor: np.ndarray
    evaporator_airflow_factor: np.ndarray
    restriction: np.ndarray  # liquid-line pressure drop at design flow / design pressure difference
    leakage: np.ndarray  # share of compressed gas leaking back to suction
    noncondensable: np.ndarray  # partial pressure of non-condensables / design condensing pressure
    valve_factor: np.ndarray  # expansion device's largest flow area / healthy

    @classmethod
    def healthy(cls, outdoor_temp, outdoor_w, return_temp, return_w) -> Conditions:
        arrays = np.broadcast_arrays(
            *(np.asarray(v, float) for v in (outdoor_temp, outdoor_w, return_temp, return_w))
        )
        n = arrays[0].shape
        ones, zeros = np.ones(n), np.zeros(n)
        return cls(
            *(a.copy() for a in arrays),
            charge_factor=ones.copy(),
            condenser_airflow_factor=ones.copy(),
            evaporator_airflow_factor=ones.copy(),
            restriction=zeros.copy(),
            leakage=zeros.copy(),
            noncondensable=zeros.copy(),
            valve_factor=ones.copy(),
        )

    def __len__(self) -> int:
        return len(self.outdoor_temp)

    def take(self, index) -> Conditions:
        return Conditions(**{f.name: getattr(self, f.name)[index] for f in fields(self)})


def rating_conditions(unit) -> Conditions:
    """The unit's rating point as a one-sample :class:`Conditions`."""
    spec = unit.spec
    t_out = np.array([spec.rating_outdoor_C + 273.15])
    t_ret = np.array([spec.rating_return_C + 273.15])
    w_ret = unit.air.humidity_ratio(t_ret, np.array([spec.rating_return_rh]))
    w_out = unit.air.humidity_ratio(t_out, np.array([0.4]))
    return Conditions.healthy(t_out, w_out, t_ret, w_ret)


def _mean_two_phase_density(x_low, x_high, rho_liquid, rho_vapour):
    """Mean density [kg/m^3] over a quality range with Zivi's void fraction [6]."""
    slip = (rho_vapour / rho_liquid) ** (2.0 / 3.0)
    mid, half = 0.5 * (x_low + x_high), 0.5 * (x_high - x_low)
    total = np.zeros_like(mid)
    for node, weight in zip(_GAUSS_NODES, _GAUSS_WEIGHTS, strict=True):
        x = mid + half * node
        alpha = x / (x + (1.0 - x) * slip)
        total += weight * (alpha * rho_vapour + (1.0 - alpha) * rho_liquid)
    return total


def _homogeneous_density(x, rho_liquid, rho_vapour):
    x = np.clip(x, 0.0, 1.0)
    return 1.0 / (x / rho_vapour + (1.0 - x) / rho_liquid)


def zone_temperature_change(fraction, available, capacity_rate, ua):
    """Temperature change [K] of refrigerant in a single-phase zone holding ``fraction`` of a coil.

    epsilon-NTU with the refrigerant as the only finite stream [3]:
    change = available * (1 - exp(-f UA / C)), ``available`` the air-to-saturation difference.
    """
    return available * -np.expm1(-fraction * ua / capacity_rate)


def zone_fraction(change, available, capacity_rate, ua):
    """Inverse of :func:`zone_temperature_change`: the coil share that gives ``change`` [K]."""
    ratio = np.clip(change / np.maximum(available, 1e-6), 0.0, 0.999999)
    return -np.log1p(-ratio) * capacity_rate / ua


def _evaporator_ua(unit, cond):
    return unit.ua_evaporator * cond.evaporator_airflow_factor**AIRFLOW_EXPONENT


def _condenser_air(unit, cond, t_cond):
    """Condenser air volume-flow factor (faults and head-pressure fan control) and UA [W/K]."""
    flow = cond.condenser_airflow_factor
    if unit.min_condensing is not None:
        fan = np.clip(
            HEAD_PRESSURE_MIN_FAN
            + (1 - HEAD_PRESSURE_MIN_FAN) * (t_cond - unit.min_condensing) / HEAD_PRESSURE_BAND_K,
            HEAD_PRESSURE_MIN_FAN,
            1.0,
        )
        flow = flow * fan
    ua = unit.ua_condenser * flow**AIRFLOW_EXPONENT * (1.0 - cond.noncondensable)
    return flow, ua


def evaluate(unit, cond: Conditions, x: np.ndarray, full: bool = False) -> dict:
    """Residuals of the four balances at states ``x`` (n, 4); with ``full`` every derived quantity.

    ``x`` columns: t_evap [K], t_cond [K], y (percent of the evaporator superheating when >= 0,
    else a wet outlet of quality 1 + y c_p,v / h_fg), z (percent of the condenser subcooling when
    >= 0, else a two-phase outlet of enthalpy h_liquid - c_p,l z).
    Returns a dict with ``residual`` (n, 4) and, when ``full``, arrays for the unit's states.
    """
    tab, air, spec = unit.refrigerant, unit.air, unit.spec
    t_evap, t_cond, y, z = x[:, 0], x[:, 1], x[:, 2], x[:, 3]
    f_sh, f_sc = np.maximum(y, 0.0) / 100.0, np.maximum(z, 0.0) / 100.0

    e = tab.grid.locate(t_evap)
    c = tab.grid.locate(t_cond)
    p_evap, p_cond = lerp(tab.p, e), lerp(tab.p, c)
    hv_e, hl_e = lerp(tab.h_vapour, e), lerp(tab.h_liquid, e)
    rv_e, rl_e = lerp(tab.rho_vapour, e), lerp(tab.rho_liquid, e)
    cpv_e, tb_e = lerp(tab.cp_vapour, e), lerp(tab.t_bubble, e)
    hv_c, hl_c = lerp(tab.h_vapour, c), lerp(tab.h_liquid, c)
    rv_c, rl_c = lerp(tab.rho_vapour, c), lerp(tab.rho_liquid, c)
    cpl_c, tb_c = lerp(tab.cp_liquid, c), lerp(tab.t_bubble, c)
    hfg_e, hfg_c = hv_e - hl_e, hv_c - hl_c

    # compressor; its flow and the superheat it sees depend on each other: three fixed-point passes
    p_discharge = p_cond + cond.noncondensable * unit.design_condensing_pressure
    t_discharge_dew = np.where(cond.noncondensable > 0, tab.dew_temperature(p_discharge), t_cond)
    rated_cols = tab.superheat_grid.locate(np.full(len(t_evap), RATED_SUPERHEAT_K))
    rho_rated = bilerp(tab.rho_superheated, e, rated_cols)
    mass_map = ahri540(unit.mass_flow_coefficients, t_evap, t_discharge_dew)
    power_map = ahri540(unit.power_coefficients, t_evap, t_discharge_dew)
    ua_e = _evaporator_ua(unit, cond)
    available_e = cond.return_temp - t_evap
    mass_flow = mass_map * (1.0 - cond.leakage)
    for _ in range(3):
        superheat = zone_temperature_change(f_sh, available_e, mass_flow * cpv_e, ua_e)
        sh_cols = tab.superheat_grid.locate(superheat)
        rho_suction = bilerp(tab.rho_superheated, e, sh_cols)
        density_factor = 1.0 + DENSITY_CORRECTION * (rho_suction / rho_rated - 1.0)
        mass_flow = mass_map * density_factor * (1.0 - cond.leakage)
    h1 = bilerp(tab.h_superheated, e, sh_cols) + cpv_e * np.minimum(y, 0.0)
    # a leaking valve re-compresses the gas it lets back: power falls less than flow (half of it)
    power = power_map * density_factor * (1.0 - 0.5 * cond.leakage)
    h2 = h1 + (1.0 - SHELL_LOSS_FRACTION) * power / mass_flow

    cond_flow, ua_c = _condenser_air(unit, cond, t_cond)
    subcooling = zone_temperature_change(
        f_sc, tb_c - cond.outdoor_temp, mass_flow * cpl_c, ua_c * SUBCOOLING_UA_SHARE
    )
    h3 = hl_c - cpl_c * np.where(z >= 0.0, subcooling, z)
    x_evap_in = np.clip((h3 - hl_e) / hfg_e, 0.0, 1.0)
    x_evap_out = np.where(y >= 0.0, 1.0, np.clip(1.0 + y * cpv_e / hfg_e, 0.0, 1.0))

    # evaporator
    v_ret = air.specific_volume(cond.return_temp, cond.return_w)
    air_e = unit.evaporator_airflow * cond.evaporator_airflow_factor / v_ret  # kg dry air / s
    t_ref_in = tb_e + x_evap_in * (t_evap - tb_e)
    t_mid_e = 0.5 * (t_ref_in + t_evap)
    h_ret = air.enthalpy(cond.return_temp, cond.return_w)
    ntu_dry = ua_e / (air_e * CP_AIR)
    q_dry = air_e * CP_AIR * (cond.return_temp - t_mid_e) * -np.expm1(-ntu_dry)
    h_sat_mid = air.saturated_enthalpy(t_mid_e)
    t_surface = 0.5 * (t_mid_e + cond.return_temp)
    c_sat = (air.saturated_enthalpy(t_surface) - h_sat_mid) / np.maximum(t_surface - t_mid_e, 1e-3)
    # [4]: the refrigerant-side resistance counts c_s / c_p,a times more in enthalpy terms
    resistance_share = (1.0 - AIR_SIDE_SHARE) * c_sat / CP_AIR + AIR_SIDE_SHARE
    q_wet = air_e * (h_ret - h_sat_mid) * -np.expm1(-ntu_dry / resistance_share)
    wet = q_wet > q_dry
    q_coil = np.where(wet, q_wet, q_dry)
    q_two_phase_e = (1.0 - f_sh) * q_coil
    r_evap = q_two_phase_e - mass_flow * (np.minimum(h1, hv_e) - h3)

    # condenser (head-pressure control slows the fan as the condensing temperature falls)
    v_out = air.specific_volume(cond.outdoor_temp, cond.outdoor_w)
    air_c = unit.condenser_airflow * cond_flow / v_out
    t_mid_c = 0.5 * (t_cond + tb_c)
    eps_c = -np.expm1(-ua_c / (air_c * CP_AIR))
    q_two_phase_c = (1.0 - f_sc) * eps_c * air_c * CP_AIR * (t_mid_c - cond.outdoor_temp)
    r_cond = q_two_phase_c - mass_flow * (h2 - np.maximum(h3, hl_c))

    # charge inventory
    x_cond_out = np.clip(-np.minimum(z, 0.0) * cpl_c / hfg_c, 0.0, 1.0)
    rho_tp_e = _mean_two_phase_density(x_evap_in, x_evap_out, rl_e, rv_e)
    rho_tp_c = _mean_two_phase_density(x_cond_out, np.ones_like(x_cond_out), rl_c, rv_c)
    rho_line = _homogeneous_density(x_cond_out, rl_c, rv_c)
    charge = (
        unit.volume_evaporator * ((1.0 - f_sh) * rho_tp_e + f_sh * rho_suction)
        + unit.volume_condenser * ((1.0 - f_sc) * rho_tp_c + f_sc * rl_c)
        + unit.volume_liquid_line * rho_line
        + unit.volume_vapour_lines * 0.5 * (rho_suction + rv_c)
    )
    r_charge = charge / unit.charge - cond.charge_factor

    # expansion device, after the liquid-line restriction
    flow_ratio = mass_flow / unit.design_mass_flow
    p_valve_in = p_discharge - cond.restriction * unit.design_pressure_difference * flow_ratio**2
    v = tab.grid.locate(tab.dew_temperature(np.maximum(p_valve_in, tab.p[0])))
    hl_v, hv_v = lerp(tab.h_liquid, v), lerp(tab.h_vapour, v)
    rl_v, rv_v = lerp(tab.rho_liquid, v), lerp(tab.rho_vapour, v)
    x_valve_in = (h3 - hl_v) / (hv_v - hl_v)
    rho_valve_in = np.where(x_valve_in > 0, _homogeneous_density(x_valve_in, rl_v, rv_v), rl_v)
    if spec.holds_superheat:
        dp = p_valve_in - p_evap
    else:
        t_liquid_in = np.interp(h3, tab.h_liquid, tab.t_bubble)
        p_flash = np.where(x_valve_in > 0, p_valve_in, tab.bubble_pressure(t_liquid_in))
        p_flash = np.minimum(p_flash, p_valve_in)
        dp = p_valve_in - p_evap - ORIFICE_CHOKE * np.maximum(p_flash - p_evap, 0.0)
    valve_flow_per_area = np.sqrt(2.0 * rho_valve_in * np.maximum(dp, 0.0))
    valve_capacity = unit.valve_flow_area * cond.valve_factor * valve_flow_per_area
    flow_mismatch = 100.0 * (valve_capacity - mass_flow) / unit.design_mass_flow
    if spec.holds_superheat:
        held = np.where(y >= 0.0, superheat, 0.1 * y) - spec.design_superheat_K
        r_valve = np.minimum(held, flow_mismatch)
    else:
        r_valve = flow_mismatch

    scale = 100.0 / unit.nominal_capacity
    residual = np.column_stack([r_evap * scale, r_cond * scale, 100.0 * r_charge, r_valve])
    out = {"residual": residual}
    if not full:
        return out

    capacity = mass_flow * (h1 - h3)
    heat_rejection = mass_flow * (h2 - h3)
    h_supply = h_ret - capacity / air_e
    w_supply = cond.return_w.copy()
    if wet.any():
        bypass = np.exp(-ntu_dry / AIR_SIDE_SHARE)
        h_adp = h_ret - (h_ret - h_supply) / (1.0 - bypass)
        t_adp = air.saturation_temperature_from_enthalpy(h_adp)
        t_wet = t_adp + bypass * (cond.return_temp - t_adp)
        at_wet = AIR_GRID.locate(t_wet)
        w_wet = (h_supply - lerp(air.h_dry, at_wet)) / lerp(air.h_per_w, at_wet)
        w_wet = np.clip(w_wet, 0.0, np.minimum(cond.return_w, air.saturated_humidity_ratio(t_wet)))
        w_supply = np.where(wet, w_wet, w_supply)
    t_supply = air.temperature(h_supply, w_supply)
    h_outdoor = air.enthalpy(cond.outdoor_temp, cond.outdoor_w)
    t_cond_air_out = air.temperature(h_outdoor + heat_rejection / air_c, cond.outdoor_w)
    discharge_superheat = tab.superheat_from_enthalpy(t_discharge_dew, h2)
    out.update(
        t_evap=t_evap,
        t_cond=t_cond,
        t_discharge_dew=t_discharge_dew,
        p_evap=p_evap,
        p_cond=p_cond,
        p_discharge=p_discharge,
        p_valve_in=p_valve_in,
        superheat=np.where(y >= 0.0, superheat, 0.0),
        subcooling=np.where(z >= 0.0, subcooling, 0.0),
        suction_temp=t_evap + superheat,
        liquid_temp=tb_c - np.where(z >= 0.0, subcooling, 0.0),
        discharge_temp=t_discharge_dew + discharge_superheat,
        mass_flow=mass_flow,
        power=power,
        current=power / unit.volts_per_amp_w,
        capacity=capacity,
        heat_rejection=heat_rejection,
        shell_loss=power - (heat_rejection - capacity),
        cop=capacity / power,
        h1=h1,
        h2=h2,
        h3=h3,
        evaporator_air_mass_flow=air_e,
        condenser_air_mass_flow=air_c,
        supply_temp=t_supply,
        supply_w=w_supply,
        condenser_leaving_air_temp=t_cond_air_out,
        sensible_capacity=air_e * (h_ret - air.enthalpy(t_supply, cond.return_w)),
        coil_wet=wet.astype(float),
        superheat_zone_fraction=f_sh,
        subcooling_zone_fraction=f_sc,
        evaporator_inlet_quality=x_evap_in,
        evaporator_outlet_quality=x_evap_out,
        valve_inlet_quality=np.maximum(x_valve_in, 0.0),
        valve_flow_per_area=valve_flow_per_area,
        valve_opening=mass_flow / np.maximum(valve_capacity, 1e-12),
        charge=charge,
        in_map_envelope=unit.compressor_map.in_envelope(t_evap, t_discharge_dew).astype(float),
    )
    return out


def initial_guess(unit, cond: Conditions) -> np.ndarray:
    """Starting states: the design point's approach temperatures moved to each sample's air."""
    spec, tab = unit.spec, unit.refrigerant
    t_evap = cond.return_temp - (spec.rating_return_C - spec.design_evaporating_C)
    t_cond = np.maximum(
        cond.outdoor_temp + (spec.design_condensing_C - spec.rating_outdoor_C),
        (unit.min_condensing or 0.0) + 2.0,
    )
    x = np.column_stack(
        [
            np.clip(t_evap, tab.grid.start + 1.0, cond.return_temp - 1.0),
            np.clip(t_cond, cond.outdoor_temp + 1.0, tab.grid.stop - 1.0),
            np.full(len(cond), unit.design_state["superheat_zone_fraction"] * 100.0),
            np.full(len(cond), unit.design_state["subcooling_zone_fraction"] * 100.0),
        ]
    )
    return x


def _project(unit, cond: Conditions, x: np.ndarray) -> np.ndarray:
    """Keep states inside the tables and on the physical side of the air temperatures."""
    tab = unit.refrigerant
    x[:, 0] = np.clip(x[:, 0], tab.grid.start + 0.1, cond.return_temp - 0.05)
    x[:, 1] = np.clip(x[:, 1], np.maximum(cond.outdoor_temp, x[:, 0]) + 0.05, tab.grid.stop - 0.1)
    x[:, 2] = np.clip(x[:, 2], -150.0, 99.0)
    x[:, 3] = np.clip(x[:, 3], -60.0, 90.0)
    return x


def solve(unit, cond: Conditions, initial: np.ndarray | None = None, max_iterations: int = 40):
    """Solve the four balances for every sample; returns (states dict, converged mask, iterations).

    Samples that fail to converge come back with NaN states and ``converged`` False.
    """
    n = len(cond)
    x = _project(unit, cond, initial_guess(unit, cond) if initial is None else initial.copy())
    converged = np.zeros(n, dtype=bool)
    iterations = np.zeros(n, dtype=int)
    active = np.arange(n)
    sub = cond
    residual = evaluate(unit, sub, x)["residual"]
    eye = np.eye(4) * 1e-9
    for iteration in range(max_iterations):
        norm = np.abs(residual).max(axis=1)
        done = norm < TOLERANCE
        converged[active[done]] = True
        iterations[active[done]] = iteration
        keep = ~done & np.isfinite(norm)
        if not keep.any():
            break
        active, residual, norm = active[keep], residual[keep], norm[keep]
        sub = cond.take(active)
        xa = x[active]
        jacobian = np.empty((len(active), 4, 4))
        for k, h in enumerate((0.01, 0.01, 0.01, 0.01)):
            shifted = xa.copy()
            shifted[:, k] += h
            jacobian[:, :, k] = (evaluate(unit, sub, shifted)["residual"] - residual) / h
        try:
            step = np.linalg.solve(jacobian + eye, -residual[:, :, None])[:, :, 0]
        except np.linalg.LinAlgError:
            step = np.stack(
                [
                    np.linalg.lstsq(j, -r, rcond=None)[0]
                    for j, r in zip(jacobian, residual, strict=True)
                ]
            )
        step = np.nan_to_num(step)
        step *= np.minimum(1.0, (MAX_STEP / np.maximum(np.abs(step), 1e-12)).min(axis=1))[:, None]
        trial = _project(unit, sub, xa + step)
        new_residual = evaluate(unit, sub, trial)["residual"]
        for _ in range(4):  # backtrack where the step made things worse
            worse = ~(np.abs(new_residual).max(axis=1) < norm)
            if not worse.any():
                break
            step[worse] *= 0.5
            trial[worse] = _project(unit, sub.take(worse), xa[worse] + step[worse])
            new_residual[worse] = evaluate(unit, sub.take(worse), trial[worse])["residual"]
        x[active] = trial
        residual = new_residual
    else:
        norm = np.abs(residual).max(axis=1)
        done = norm < TOLERANCE
        converged[active[done]] = True
        iterations[active[done]] = max_iterations
    states = evaluate(unit, cond, x, full=True)
    states = {
        k: np.where(converged, v, np.nan) if k != "residual" else v for k, v in states.items()
    }
    return states, converged, iterations
