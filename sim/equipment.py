"""Equipment of a simulated unit: what it is (:class:`UnitSpec`) and how it is sized.

A :class:`UnitSpec` names the refrigerant, kind, expansion device, capacity, airflows and the
design operating point at the rating conditions (outdoor 35 degC, return air 26.7 degC dry bulb /
19.4 degC wet bulb for air conditioners, AHRI 210/240 test "A"; box 2 degC for cold rooms).
:func:`size_unit` turns it into a :class:`UnitParameters` whose components reproduce that design
point exactly: a compressor map generated from a physical reciprocating/scroll model and fitted
with the AHRI 540 polynomial, evaporator and condenser conductances UA, an expansion-device flow
coefficient and the refrigerant charge held at the design point.

The compressor map comes from ``rimewatch.physics.compressor`` (the same class the monitoring side
reads from the unit description); :func:`generated_compressor_map` is the only place that knows
how the simulated compressor was made.

References
----------
.. [1] AHRI Standard 540-2020, "Performance Rating of Positive Displacement Refrigerant
   Compressors" (rating suction superheat 20 degF = 11.1 K).
.. [2] AHRI Standard 210/240-2023, "Performance Rating of Unitary Air-conditioning & Air-source
   Heat Pump Equipment" (test "A": 95 degF outdoor, 80/67 degF indoor).
.. [3] Stoecker, W. F., Jones, J. W. (1982). "Refrigeration and Air Conditioning", 2nd ed.,
   McGraw-Hill, ch. 11: clearance volumetric efficiency eta_v = 1 - C (p_r^(1/n) - 1).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from scipy.optimize import brentq

from rimewatch.physics import refrigerant as exact
from rimewatch.physics.compressor import CompressorMap, fit_ahri540
from rimewatch.sim import model
from rimewatch.sim.model import RATED_SUPERHEAT_K
from rimewatch.sim.properties import (
    AirTables,
    RefrigerantTables,
    air_tables,
    lerp,
    properties,
    refrigerant_tables,
)

KINDS = ("rooftop_unit", "split_system", "cold_room_condensing_unit")
EXPANSION_DEVICES = ("txv", "eev", "fixed_orifice")
CLEARANCE_RATIO = 0.04  # C in [3]
POLYTROPIC_EXPONENT = 1.15  # n in [3]


@dataclass(frozen=True)
class UnitSpec:
    """What to simulate. Temperatures in degC at the design (rating) point, as people quote them.

    Attributes
    ----------
    refrigerant, kind, expansion_device : as in design.md's equipment description.
    nominal_capacity_kW : total cooling capacity at the rating point [kW].
    rating_outdoor_C, rating_return_C, rating_return_rh : rating conditions (condenser entering
        air, evaporator entering air, its relative humidity 0-1).
    design_evaporating_C, design_condensing_C : dew points at the rating point.
    design_superheat_K, design_subcooling_K : at the rating point; a TXV/EEV holds the superheat.
    evaporator_airflow_m3_s, condenser_airflow_m3_s : design volume flows at the coil inlets.
    min_condensing_C : head-pressure control (condenser fan speed) keeps the condensing dew point
        above this; None for no control.
    liquid_line_volume_L_per_kW : internal volume of the liquid line (line-set length).
    """

    refrigerant: str = "R410A"
    kind: str = "rooftop_unit"
    expansion_device: str = "txv"
    nominal_capacity_kW: float = 17.5
    rating_outdoor_C: float = 35.0
    rating_return_C: float = 26.7
    rating_return_rh: float = 0.507
    design_evaporating_C: float = 8.0
    design_condensing_C: float = 47.0
    design_superheat_K: float = 6.0
    design_subcooling_K: float = 6.0
    evaporator_airflow_m3_s: float = 0.94
    condenser_airflow_m3_s: float = 2.6
    min_condensing_C: float | None = 30.0
    liquid_line_volume_L_per_kW: float = 0.025

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ValueError(
                f"kind {self.kind!r} cannot be simulated; choose one of {', '.join(KINDS)} "
                "(air-cooled units only)"
            )
        if self.expansion_device not in EXPANSION_DEVICES:
            raise ValueError(
                f"expansion device {self.expansion_device!r} unknown; "
                f"choose one of {', '.join(EXPANSION_DEVICES)}"
            )
        exact.get_refrigerant(self.refrigerant)
        if not self.design_evaporating_C < self.rating_return_C - 3:
            raise ValueError("design evaporating temperature must sit below the return air")
        if not self.design_condensing_C > self.rating_outdoor_C + self.design_subcooling_K + 1:
            raise ValueError(
                "design condensing temperature must exceed outdoor air plus subcooling by 1 K"
            )

    @property
    def holds_superheat(self) -> bool:
        """True for thermostatic and electronic valves."""
        return self.expansion_device in ("txv", "eev")


def default_unit(
    kind: str = "rooftop_unit",
    refrigerant: str | None = None,
    expansion_device: str | None = None,
    nominal_capacity_kW: float | None = None,
) -> UnitSpec:
    """A typical unit of the given kind (our invented but ordinary equipment).

    Air flows follow common practice: about 54 L/s of evaporator air per kW (400 cfm per ton) for
    comfort cooling; condenser air about 2.5 to 3 times that.
    """
    if kind == "rooftop_unit":
        base = UnitSpec(refrigerant="R410A", kind=kind, expansion_device="txv")
    elif kind == "split_system":
        base = UnitSpec(
            refrigerant="R410A",
            kind=kind,
            expansion_device="fixed_orifice",
            nominal_capacity_kW=10.5,
            design_superheat_K=9.0,
            design_subcooling_K=5.0,
            evaporator_airflow_m3_s=0.566,
            condenser_airflow_m3_s=1.55,
            min_condensing_C=None,
            liquid_line_volume_L_per_kW=0.045,
        )
    elif kind == "cold_room_condensing_unit":
        base = UnitSpec(
            refrigerant="R404A",
            kind=kind,
            expansion_device="txv",
            nominal_capacity_kW=6.0,
            rating_outdoor_C=32.0,
            rating_return_C=2.0,
            rating_return_rh=0.85,
            design_evaporating_C=-6.0,
            design_condensing_C=42.0,
            design_superheat_K=6.0,
            design_subcooling_K=4.0,
            evaporator_airflow_m3_s=0.9,
            condenser_airflow_m3_s=1.1,
            min_condensing_C=28.0,
            liquid_line_volume_L_per_kW=0.06,
        )
    else:
        raise ValueError(f"kind {kind!r} cannot be simulated; choose one of {', '.join(KINDS)}")
    changes: dict = {}
    if refrigerant is not None:
        changes["refrigerant"] = exact.get_refrigerant(refrigerant).designation
    if expansion_device is not None:
        changes["expansion_device"] = expansion_device
        if expansion_device == "fixed_orifice" and base.expansion_device != "fixed_orifice":
            changes["design_superheat_K"] = 9.0
    if nominal_capacity_kW is not None:
        scale = nominal_capacity_kW / base.nominal_capacity_kW
        changes["nominal_capacity_kW"] = nominal_capacity_kW
        changes["evaporator_airflow_m3_s"] = base.evaporator_airflow_m3_s * scale
        changes["condenser_airflow_m3_s"] = base.condenser_airflow_m3_s * scale
    return replace(base, **changes)


@dataclass(frozen=True)
class UnitParameters:
    """A sized unit: every constant the steady-state model needs (SI)."""

    spec: UnitSpec
    refrigerant: RefrigerantTables
    air: AirTables
    compressor_map: CompressorMap
    mass_flow_coefficients: np.ndarray  # AHRI 540, K -> kg/s
    power_coefficients: np.ndarray  # AHRI 540, K -> W
    volts_per_amp_w: float  # W per A of compressor current (V * power factor * sqrt(phases))
    ua_evaporator: float  # W/K at design airflow
    ua_condenser: float  # W/K at design airflow
    evaporator_airflow: float  # m^3/s
    condenser_airflow: float  # m^3/s
    volume_evaporator: float  # m^3, refrigerant side
    volume_condenser: float
    volume_liquid_line: float
    volume_vapour_lines: float
    valve_flow_area: float  # Cd*A [m^2]: fixed orifice, or a TXV/EEV's largest opening
    charge: float  # kg at the design point
    design_mass_flow: float  # kg/s
    design_pressure_difference: float  # Pa, condensing - evaporating
    design_condensing_pressure: float  # Pa
    nominal_capacity: float  # W
    design_state: dict = field(default_factory=dict)

    @property
    def min_condensing(self) -> float | None:
        c = self.spec.min_condensing_C
        return None if c is None else c + 273.15


# valve sizing: a TXV's full opening passes this multiple of the design flow (common practice)
TXV_OVERSIZE = 1.3
EEV_OVERSIZE = 1.8


def _physical_compressor(tables: RefrigerantTables, t_evap, t_cond, displacement_m3_s):
    """Mass flow [kg/s] and input power [W] of the reference compressor at rated superheat.

    Mass flow = displacement x clearance volumetric efficiency [3] x suction density; power from an
    isentropic efficiency that peaks at 0.70 near pressure ratio 3 and a motor efficiency of 0.92
    (our invented but ordinary scroll compressor).
    """
    t_evap, t_cond = np.asarray(t_evap, float), np.asarray(t_cond, float)
    p_evap = np.interp(t_evap, tables.grid.values(), tables.p)
    p_cond = np.interp(t_cond, tables.grid.values(), tables.p)
    ratio = p_cond / p_evap
    t_suction = t_evap + RATED_SUPERHEAT_K
    h1 = np.asarray(properties.enthalpy(tables.designation, p_evap, t_suction))
    s1 = np.asarray(properties.entropy(tables.designation, p_evap, t_suction))
    rho1 = np.asarray(properties.density(tables.designation, p_evap, t_suction))
    _, h2s = exact.isentropic_state(tables.designation, p_cond, s1)
    eta_v = 1.0 - CLEARANCE_RATIO * (ratio ** (1.0 / POLYTROPIC_EXPONENT) - 1.0)
    eta_s = np.clip(0.70 - 0.012 * (ratio - 3.0) ** 2, 0.40, 0.70)
    mass_flow = displacement_m3_s * eta_v * rho1
    power = mass_flow * (np.asarray(h2s) - h1) / (eta_s * 0.92)
    return mass_flow, power


def generated_compressor_map(
    spec: UnitSpec, tables: RefrigerantTables, displacement_m3_s: float, volts_per_amp_w: float
) -> CompressorMap:
    """An AHRI 540 map [1] fitted to the reference compressor over an envelope around the design."""
    te, tc = spec.design_evaporating_C, spec.design_condensing_C
    suction = (te - 25.0, te + 12.0)
    discharge = (max(tc - 30.0, suction[1] + 12.0), min(tc + 20.0, tables.grid.stop - 275.0))
    s_grid, d_grid = np.meshgrid(np.linspace(*suction, 8), np.linspace(*discharge, 8))
    s, d = s_grid.ravel(), d_grid.ravel()
    mass_flow, power = _physical_compressor(tables, s + 273.15, d + 273.15, displacement_m3_s)
    mapping = {
        "model": f"simulated scroll {spec.refrigerant} {displacement_m3_s * 3.6e6:.0f} L/h",
        "source": "generated by rimewatch.sim from a clearance-volume compressor model",
        "refrigerant": spec.refrigerant,
        "units": {"temperature": "degC", "mass_flow": "kg/s", "power": "W", "current": "A"},
        "rating": {"suction_superheat": RATED_SUPERHEAT_K},
        "envelope": {"suction": list(suction), "discharge": list(discharge)},
        "coefficients": {
            "mass_flow": fit_ahri540(s, d, mass_flow).tolist(),
            "power": fit_ahri540(s, d, power).tolist(),
            "current": fit_ahri540(s, d, power / volts_per_amp_w).tolist(),
        },
    }
    return CompressorMap.from_dict(mapping)


def kelvin_coefficients(cmap: CompressorMap, quantity: str, unit: str) -> np.ndarray:
    """The map's coefficients re-expressed for temperatures in K and the given SI output unit."""
    converted = cmap.converted(temperature_unit="K", **{quantity: unit})
    return np.asarray(converted.coefficients[quantity][0], float)


def size_unit(spec: UnitSpec, atmospheric_pressure: float = 101325.0) -> UnitParameters:
    """Size every component so that the unit runs exactly at its design point at rating conditions.

    Raises
    ------
    ValueError
        When the design point is impossible (for example an evaporator that would need more than
        the entering air can give).
    """
    tables = refrigerant_tables(spec.refrigerant)
    air = air_tables(float(atmospheric_pressure))
    t_evap = spec.design_evaporating_C + 273.15
    t_cond = spec.design_condensing_C + 273.15
    capacity = spec.nominal_capacity_kW * 1e3

    e = tables.grid.locate(np.array([t_evap]))
    c = tables.grid.locate(np.array([t_cond]))
    h1, _ = tables.superheated(np.array([t_evap]), np.array([spec.design_superheat_K]))
    h3 = lerp(tables.h_liquid, c) - lerp(tables.cp_liquid, c) * spec.design_subcooling_K
    mass_flow = float(capacity / (h1 - h3)[0])

    three_phase = spec.kind != "split_system"
    volts_per_amp_w = 400.0 * 0.85 * np.sqrt(3.0) if three_phase else 230.0 * 0.95
    rho_actual = tables.superheated(np.array([t_evap]), np.array([spec.design_superheat_K]))[1]
    rho_rated = tables.superheated(np.array([t_evap]), np.array([RATED_SUPERHEAT_K]))[1]
    correction = 1.0 + 0.75 * (rho_actual / rho_rated - 1.0)
    per_displacement, _ = _physical_compressor(tables, t_evap, t_cond, 1.0)
    displacement = mass_flow / float(per_displacement * correction[0])
    cmap = generated_compressor_map(spec, tables, displacement, volts_per_amp_w)

    rho_air_e = 1.0 / float(
        air.specific_volume(
            np.array([spec.rating_return_C + 273.15]),
            air.humidity_ratio(np.array([spec.rating_return_C + 273.15]), spec.rating_return_rh),
        )[0]
    )
    draft = UnitParameters(
        spec=spec,
        refrigerant=tables,
        air=air,
        compressor_map=cmap,
        mass_flow_coefficients=kelvin_coefficients(cmap, "mass_flow", "kg/s"),
        power_coefficients=kelvin_coefficients(cmap, "power", "W"),
        volts_per_amp_w=float(volts_per_amp_w),
        ua_evaporator=np.nan,
        ua_condenser=np.nan,
        evaporator_airflow=spec.evaporator_airflow_m3_s,
        condenser_airflow=spec.condenser_airflow_m3_s,
        volume_evaporator=0.15e-3 * spec.nominal_capacity_kW,
        volume_condenser=0.35e-3 * spec.nominal_capacity_kW,
        volume_liquid_line=spec.liquid_line_volume_L_per_kW * 1e-3 * spec.nominal_capacity_kW,
        volume_vapour_lines=0.08e-3 * spec.nominal_capacity_kW,
        valve_flow_area=np.nan,
        charge=np.nan,
        design_mass_flow=mass_flow,
        design_pressure_difference=float((lerp(tables.p, c) - lerp(tables.p, e))[0]),
        design_condensing_pressure=float(lerp(tables.p, c)[0]),
        nominal_capacity=capacity,
    )
    design = model.rating_conditions(draft)
    map_flow = model.ahri540(draft.mass_flow_coefficients, t_evap, t_cond) * correction[0]
    draft = replace(draft, design_mass_flow=float(map_flow))
    cpv_e = float(lerp(tables.cp_vapour, e)[0])
    cpl_c = float(lerp(tables.cp_liquid, c)[0])
    t_bubble_c = float(lerp(tables.t_bubble, c)[0])

    def states(ua_e, ua_c):
        f_sh = model.zone_fraction(
            spec.design_superheat_K, spec.rating_return_C + 273.15 - t_evap, map_flow * cpv_e, ua_e
        )
        f_sc = model.zone_fraction(
            spec.design_subcooling_K,
            t_bubble_c - (spec.rating_outdoor_C + 273.15),
            map_flow * cpl_c,
            ua_c * model.SUBCOOLING_UA_SHARE,
        )
        return np.array([[t_evap, t_cond, 100.0 * f_sh, 100.0 * f_sc]], dtype=float)

    def evaporator_mismatch(ua):
        trial = replace(draft, ua_evaporator=ua, ua_condenser=1e4)
        return model.evaluate(trial, design, states(ua, 1e4))["residual"][0, 0]

    def condenser_mismatch(ua):
        trial = replace(draft, ua_evaporator=ua_e, ua_condenser=ua)
        return model.evaluate(trial, design, states(ua_e, ua))["residual"][0, 1]

    try:
        ua_e = brentq(evaporator_mismatch, 0.5 * rho_air_e * 1006.0 * 0.01, 2e6, xtol=1e-6)
        ua_c = brentq(condenser_mismatch, 1.0, 2e6, xtol=1e-6)
    except ValueError as error:
        raise ValueError(
            f"cannot size the coils for the design point of {spec.kind} ({spec.refrigerant}): "
            "the air flows cannot carry the design capacity at these temperatures"
        ) from error
    x = states(ua_e, ua_c)
    sized = replace(draft, ua_evaporator=ua_e, ua_condenser=ua_c, charge=1.0, valve_flow_area=1.0)
    state = model.evaluate(sized, design, x, full=True)
    oversize = {"txv": TXV_OVERSIZE, "eev": EEV_OVERSIZE, "fixed_orifice": 1.0}[
        spec.expansion_device
    ]
    mass_flow = float(state["mass_flow"][0])
    valve_area = float(mass_flow / state["valve_flow_per_area"][0]) * oversize
    charge = float(state["charge"][0])
    sized = replace(sized, valve_flow_area=valve_area, charge=charge)
    final = model.evaluate(sized, design, x, full=True)
    sized = replace(sized, nominal_capacity=float(final["capacity"][0]))
    return replace(
        sized, design_state={k: float(v[0]) for k, v in final.items() if np.ndim(v) == 1}
    )
