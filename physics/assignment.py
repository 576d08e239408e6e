"""State-point assignment: where each sensor sits in the cycle, in what unit, for which refrigerant.

A point list says "this reading is the suction pressure, in bar, on an R410A circuit"; the physics
of the vapour-compression cycle can check that claim. Only two pressure levels exist while the
compressor runs (evaporating and condensing); the discharge state is the hottest and has the highest
enthalpy; the liquid line and the evaporator inlet share the lowest enthalpy, the suction state lies
between; suction gas is at or above its dew point, liquid at or below its bubble point, and the
discharge enthalpy lies above the isentropic one. With the compressor off long enough every pressure
sensor reads the same equalised pressure, every pipe the temperature of its surroundings, and (with
liquid present) that pressure is the saturation pressure at the surrounding temperature.

:func:`assign_state_points` enumerates hypotheses (permutations of the labelled refrigerant-side
roles and unit mix-ups of each sensor, at most ``max_changes`` departures from the configuration),
scores each by the fraction of samples satisfying each physical constraint (:data:`CONSTRAINTS`
documents them), ranks them and explains the winner. :func:`check_refrigerant` tests the configured
refrigerant against standstill data (and, when there is no standstill, the condenser approach) and
ranks the supported refrigerants by their residual. :func:`commission_unit` runs both.

Scoring: each constraint ``c`` gives the fraction ``f_c`` of its samples that satisfy it; a
hypothesis' score is ``sum(w_c f_c) / sum(w_c)`` over the constraints the data allow. Hypotheses are
ranked by score minus ``PRIOR_PENALTY`` per change, so that a change is proposed only when the data
pay for it. A change is called decisive when its score beats the configuration by
``DECISIVE_MARGIN``. The search runs in two stages: every hypothesis is scored with the constraints
that need only saturation temperatures; the best ``REFINE_TOP`` (and the configuration) are then
rescored with the compression and enthalpy-order constraints (a CoolProp flash per sample).

Tolerances are common practice for field sensors (from memory): clamp-on pipe sensors read within
about 1-2 K of the fluid, transducers within about 1 % of span.

References
----------
.. [1] ASHRAE Handbook - Refrigeration (2022), ch. 2 "Refrigerant System Chemistry" and ch. 8
   "Equipment and System Dehydrating, Charging and Testing" (standstill pressure follows the
   saturation pressure at the coldest point holding liquid).
.. [2] Stoecker, W. F. (1998). "Industrial Refrigeration Handbook", McGraw-Hill, ch. 1 (the
   standard vapour-compression cycle: state points, isentropic efficiency).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from rimewatch.physics import refrigerant as props
from rimewatch.physics import standstill

PRESSURE_ROLES = ("suction_pressure", "discharge_pressure", "liquid_pressure")
PIPE_TEMPERATURE_ROLES = ("suction_temp", "discharge_temp", "liquid_temp", "evaporator_outlet_temp")
AIR_TEMPERATURE_ROLES = (
    "outdoor_air_temp",
    "condenser_leaving_air_temp",
    "return_air_temp",
    "supply_air_temp",
    "box_temp",
)
TEMPERATURE_ROLES = PIPE_TEMPERATURE_ROLES + AIR_TEMPERATURE_ROLES
CHECKED_ROLES = PRESSURE_ROLES + TEMPERATURE_ROLES

PRIOR_PENALTY = 0.01
DECISIVE_MARGIN = 0.05
TIE_MARGIN = 0.01
REFINE_TOP = 25
MAX_RUNNING_SAMPLES = 120
MAX_STANDSTILL_SAMPLES = 60
MIN_RUNNING_SAMPLES = 30
MIN_STANDSTILL_SAMPLES = 5
CONSISTENT_FRACTION = 0.9

# Plausible physical ranges for any sensor of a refrigeration circuit.
TEMPERATURE_RANGE_K = (200.0, 450.0)
PRESSURE_RANGE_PA = (5.0e3, 15.0e6)

# Pipes at standstill: within STANDSTILL_PIPE_K [K] of the surrounding air. The discharge line
# may stay up to DISCHARGE_WARM_K above it: the compressor's mass cools over the best part of an
# hour after a stop, and a crankcase heater keeps it warm for good (common practice, from memory).
STANDSTILL_PIPE_K = 5.0
DISCHARGE_WARM_K = 15.0

# Refrigerant identification from standstill data: |T_bubble(p_eq) - T_coldest surroundings| [K].
REFRIGERANT_FIT_K = 2.0
REFRIGERANT_TIE_K = 1.0
REFRIGERANT_FIT_FRACTION = 0.8


# --- unit mix-ups ---------------------------------------------------------------------------------


@dataclass(frozen=True)
class UnitFix:
    """A unit mix-up: the sensor reports ``actual`` while the site file says ``configured``.

    ``correct(values_si, atmospheric_pressure)`` turns the stored SI values (converted with the
    configured unit) into the true SI values.
    """

    name: str
    kind: str
    configured: str
    actual: str
    description: str

    def correct(self, values: np.ndarray, atmospheric_pressure: float) -> np.ndarray:
        return _CORRECTIONS[self.name](values, atmospheric_pressure)


_CORRECTIONS = {
    "gauge_logged_as_absolute": lambda v, atm: v + atm,
    "absolute_logged_as_gauge": lambda v, atm: v - atm,
    "degF_labelled_degC": lambda v, atm: (v - 273.15 - 32.0) / 1.8 + 273.15,
    "degC_labelled_degF": lambda v, atm: (v - 273.15) * 1.8 + 32.0 + 273.15,
    "K_labelled_degC": lambda v, atm: v - 273.15,
    "degC_labelled_K": lambda v, atm: v + 273.15,
}

UNIT_FIXES: dict[str, UnitFix] = {
    f.name: f
    for f in (
        UnitFix(
            "gauge_logged_as_absolute",
            "pressure",
            "absolute",
            "gauge",
            "reads gauge pressure but is configured as absolute (one atmosphere low)",
        ),
        UnitFix(
            "absolute_logged_as_gauge",
            "pressure",
            "gauge",
            "absolute",
            "reads absolute pressure but is configured as gauge (one atmosphere high)",
        ),
        UnitFix(
            "degF_labelled_degC",
            "temperature",
            "degC",
            "degF",
            "reads degF but is configured as degC",
        ),
        UnitFix(
            "degC_labelled_degF",
            "temperature",
            "degF",
            "degC",
            "reads degC but is configured as degF",
        ),
        UnitFix(
            "K_labelled_degC", "temperature", "degC", "K", "reads kelvin but is configured as degC"
        ),
        UnitFix(
            "degC_labelled_K", "temperature", "K", "degC", "reads degC but is configured as kelvin"
        ),
    )
}

_GAUGE_UNITS = {"psig", "psi(g)", "kpa(g)", "bar(g)", "mpa(g)"}


def _unit_family(unit: str | None, kind: str) -> str | None:
    """``"absolute"`` or ``"gauge"`` for a pressure unit; ``"degC"``, ``"degF"`` or ``"K"``."""
    if unit is None:
        return None
    key = unit.replace(" ", "").lower()
    if kind == "pressure":
        return "gauge" if key in _GAUGE_UNITS else "absolute"
    return {
        "degc": "degC",
        "°c": "degC",
        "c": "degC",
        "degf": "degF",
        "°f": "degF",
        "f": "degF",
    }.get(key, "K" if key == "k" else None)


def unit_fix_candidates(role: str, configured_unit: str | None = None) -> tuple[str, ...]:
    """Unit mix-ups worth testing for a ``role`` point configured in ``configured_unit``.

    Without a configured unit every mix-up of the role's kind is a candidate.
    """
    kind = "pressure" if role in PRESSURE_ROLES else "temperature"
    family = _unit_family(configured_unit, kind)
    return tuple(
        f.name
        for f in UNIT_FIXES.values()
        if f.kind == kind and (family is None or f.configured == family)
    )


# --- hypotheses -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class Hypothesis:
    """Where each sensor really sits and in which unit it really reports.

    Attributes
    ----------
    sources : ``(role, sensor)`` pairs: the sensor configured as ``sensor`` measures ``role``.
    fixes : ``(sensor, fix name)`` pairs for sensors whose unit is mixed up (see UNIT_FIXES).
    """

    sources: tuple[tuple[str, str], ...]
    fixes: tuple[tuple[str, str], ...] = ()

    def source(self, role: str) -> str:
        return dict(self.sources)[role]

    def fix(self, sensor: str) -> str | None:
        return dict(self.fixes).get(sensor)

    def role_of(self, sensor: str) -> str:
        return {s: r for r, s in self.sources}[sensor]

    @property
    def cost(self) -> int:
        """Number of departures from the configuration (a swap counts one, a k-cycle k-1)."""
        moved = {role: sensor for role, sensor in self.sources if role != sensor}
        cycles, seen = 0, set()
        for start in moved:
            if start in seen:
                continue
            cycles += 1
            node = start
            while node not in seen:
                seen.add(node)
                node = moved[node]
        return len(moved) - cycles + len(self.fixes)

    @property
    def is_configured(self) -> bool:
        return self.cost == 0

    def changes(self) -> list[str]:
        """The departures from the configuration, in words."""
        words = [
            f"the sensor configured as {sensor} measures {role}"
            for role, sensor in self.sources
            if role != sensor
        ]
        words += [f"{sensor} {UNIT_FIXES[name].description}" for sensor, name in self.fixes]
        return words

    def describe(self) -> str:
        return "; ".join(self.changes()) or "as configured"


def _cycle_count_cost(mapping: dict[str, str]) -> int:
    return Hypothesis(tuple(mapping.items())).cost


def _permutations(roles: list[str]) -> list[tuple[dict[str, str], int]]:
    out = []
    for perm in itertools.permutations(roles):
        mapping = dict(zip(roles, perm, strict=True))
        out.append((mapping, _cycle_count_cost(mapping)))
    return out


def enumerate_hypotheses(
    roles: list[str], fix_options: dict[str, tuple[str, ...]], max_changes: int = 2
) -> list[Hypothesis]:
    """Every hypothesis with at most ``max_changes`` departures from the configuration.

    Pressure roles are permuted among themselves, pipe temperatures among themselves; air
    temperatures keep their roles but may have a unit mix-up. ``fix_options`` maps each sensor to
    the unit mix-ups to consider for it.
    """
    pressures = [r for r in roles if r in PRESSURE_ROLES]
    pipes = [r for r in roles if r in PIPE_TEMPERATURE_ROLES]
    fixed = [r for r in roles if r not in PRESSURE_ROLES and r not in PIPE_TEMPERATURE_ROLES]
    single_fixes = [(sensor, name) for sensor, names in fix_options.items() for name in names]
    out = []
    for (p_map, p_cost), (t_map, t_cost) in itertools.product(
        _permutations(pressures), _permutations(pipes)
    ):
        budget = max_changes - p_cost - t_cost
        if budget < 0:
            continue
        sources = tuple({**p_map, **t_map, **{r: r for r in fixed}}.items())
        for k in range(budget + 1):
            for combo in itertools.combinations(single_fixes, k):
                sensors = [sensor for sensor, _ in combo]
                if len(set(sensors)) == len(sensors):
                    out.append(Hypothesis(sources, tuple(combo)))
    return out


# --- constraints ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class Constraint:
    """A physical consistency check on one set of samples.

    ``roles`` are the roles whose readings it uses; ``weight`` its importance in the score;
    ``refined`` marks the costly checks run only in the second stage.
    """

    name: str
    description: str
    roles: tuple[str, ...]
    samples: str  # "running", "standstill" or "any"
    weight: float
    residual_unit: str
    refined: bool = False


@dataclass(frozen=True)
class ConstraintResult:
    """How one hypothesis fares on one constraint.

    ``fraction`` of ``count`` samples satisfy it; ``residual`` is the median of the quantity
    checked (in ``constraint.residual_unit``), NaN when no sample could be evaluated.
    """

    constraint: Constraint
    count: int
    fraction: float
    residual: float


class _Evaluator:
    """Sampled readings and cached properties shared by every hypothesis."""

    def __init__(self, frame, refrigerant, samples, atmospheric_pressure):
        self.refrigerant = props.get_refrigerant(refrigerant)
        self.atmospheric_pressure = atmospheric_pressure
        self.raw = {
            name: {c: frame.loc[index, c].to_numpy(dtype=float) for c in frame.columns}
            for name, index in samples.items()
        }
        self.counts = {name: len(index) for name, index in samples.items()}
        self._cache: dict = {}

    def _memo(self, key, compute):
        if key not in self._cache:
            self._cache[key] = compute()
        return self._cache[key]

    def value(self, samples: str, hyp: Hypothesis, role: str) -> np.ndarray:
        sensor = hyp.source(role)
        fix = hyp.fix(sensor)
        raw = self.raw[samples][sensor]
        if fix is None:
            return raw
        return self._memo(
            ("value", samples, sensor, fix),
            lambda: UNIT_FIXES[fix].correct(raw, self.atmospheric_pressure),
        )

    def _key(self, hyp, role):
        sensor = hyp.source(role)
        return sensor, hyp.fix(sensor)

    def saturation(self, samples, hyp, role, phase):
        def compute():
            p = self.value(samples, hyp, role)
            return np.asarray(props.saturation_temperature(self.refrigerant, p, phase), float)

        return self._memo(("sat", samples, self._key(hyp, role), phase), compute)

    def enthalpy(self, samples, hyp, p_role, t_role):
        def compute():
            p, t = self.value(samples, hyp, p_role), self.value(samples, hyp, t_role)
            return np.asarray(props.enthalpy(self.refrigerant, p, t), float)

        key = ("h", samples, self._key(hyp, p_role), self._key(hyp, t_role))
        return self._memo(key, compute)

    def isentropic_enthalpy(self, samples, hyp):
        def compute():
            p1 = self.value(samples, hyp, "suction_pressure")
            t1 = self.value(samples, hyp, "suction_temp")
            p2 = self.value(samples, hyp, "discharge_pressure")
            s1 = np.asarray(props.entropy(self.refrigerant, p1, t1), float)
            return np.asarray(props.isentropic_state(self.refrigerant, p2, s1)[1], float)

        key = (
            "h2s",
            samples,
            self._key(hyp, "suction_pressure"),
            self._key(hyp, "suction_temp"),
            self._key(hyp, "discharge_pressure"),
        )
        return self._memo(key, compute)


def _liquid_pressure_role(roles) -> str:
    return "liquid_pressure" if "liquid_pressure" in roles else "discharge_pressure"


def _pressure_lift(ev, h, s, roles):
    ratio = ev.value(s, h, "discharge_pressure") / ev.value(s, h, "suction_pressure")
    return ratio >= 1.3, ratio


def _liquid_line_pressure(ev, h, s, roles):
    p_d, p_l = ev.value(s, h, "discharge_pressure"), ev.value(s, h, "liquid_pressure")
    ok = (p_l >= 0.8 * p_d - 50e3) & (p_l <= 1.03 * p_d + 30e3)
    return ok, p_l - p_d


def _suction_superheat(ev, h, s, roles):
    superheat = ev.value(s, h, "suction_temp") - ev.saturation(s, h, "suction_pressure", "dew")
    return (superheat >= -1.5) & (superheat <= 35.0), superheat


def _liquid_subcooling(ev, h, s, roles):
    p_role = _liquid_pressure_role(roles)
    subcooling = ev.saturation(s, h, p_role, "bubble") - ev.value(s, h, "liquid_temp")
    return (subcooling >= -1.5) & (subcooling <= 25.0), subcooling


def _discharge_superheat(ev, h, s, roles):
    dsh = ev.value(s, h, "discharge_temp") - ev.saturation(s, h, "discharge_pressure", "dew")
    return (dsh >= 3.0) & (dsh <= 100.0), dsh


def _compression(ev, h, s, roles):
    h1 = ev.enthalpy(s, h, "suction_pressure", "suction_temp")
    h2 = ev.enthalpy(s, h, "discharge_pressure", "discharge_temp")
    h2s = ev.isentropic_enthalpy(s, h)
    with np.errstate(divide="ignore", invalid="ignore"):
        efficiency = np.where(h2 > h1, (h2s - h1) / (h2 - h1), np.nan)
    return (efficiency >= 0.3) & (efficiency <= 1.1), efficiency


def _enthalpy_order(ev, h, s, roles):
    h_liquid = ev.enthalpy(s, h, _liquid_pressure_role(roles), "liquid_temp")
    h_suction = ev.enthalpy(s, h, "suction_pressure", "suction_temp")
    h_discharge = ev.enthalpy(s, h, "discharge_pressure", "discharge_temp")
    return (h_liquid < h_suction) & (h_suction < h_discharge), h_discharge - h_liquid


def _evaporator_outlet(ev, h, s, roles):
    t_out = ev.value(s, h, "evaporator_outlet_temp")
    dew = ev.saturation(s, h, "suction_pressure", "dew")
    ok = (t_out >= dew - 1.5) & (t_out <= ev.value(s, h, "suction_temp") + 3.0)
    return ok, t_out - dew


def _condenser_approach(ev, h, s, roles):
    approach = ev.saturation(s, h, "discharge_pressure", "dew") - ev.value(s, h, "outdoor_air_temp")
    return (approach >= 2.0) & (approach <= 30.0), approach


def _liquid_above_outdoor(ev, h, s, roles):
    difference = ev.value(s, h, "liquid_temp") - ev.value(s, h, "outdoor_air_temp")
    return difference >= -2.0, difference


def _evaporator_approach(role):
    def check(ev, h, s, roles):
        approach = ev.value(s, h, role) - ev.saturation(s, h, "suction_pressure", "dew")
        return (approach >= 1.0) & (approach <= 35.0), approach

    return check


def _standstill_pressures_equal(ev, h, s, roles):
    values = np.vstack([ev.value(s, h, r) for r in roles if r in PRESSURE_ROLES])
    spread = values.max(axis=0) - values.min(axis=0)
    return spread <= np.maximum(30e3, 0.03 * np.median(values, axis=0)), spread


def _standstill_temperature(role):
    warm_side = DISCHARGE_WARM_K if role == "discharge_temp" else STANDSTILL_PIPE_K

    def check(ev, h, s, roles):
        air = [r for r in roles if r in AIR_TEMPERATURE_ROLES]
        reference = air or [r for r in roles if r in PIPE_TEMPERATURE_ROLES and r != role]
        others = np.vstack([ev.value(s, h, r) for r in reference])
        own = ev.value(s, h, role)
        low = others.min(axis=0) - STANDSTILL_PIPE_K
        high = others.max(axis=0) + warm_side
        return (own >= low) & (own <= high), own - np.median(others, axis=0)

    return check


def _standstill_saturation(role):
    def check(ev, h, s, roles):
        temps = np.vstack([ev.value(s, h, r) for r in roles if r in TEMPERATURE_ROLES])
        saturation = ev.saturation(s, h, role, "bubble")
        low, high = temps.min(axis=0) - 3.0, temps.max(axis=0) + 3.0
        ok = (saturation >= low) & (saturation <= high)
        return ok, saturation - np.median(temps, axis=0)

    return check


def _physical_range(role):
    low, high = PRESSURE_RANGE_PA if role in PRESSURE_ROLES else TEMPERATURE_RANGE_K

    def check(ev, h, s, roles):
        value = ev.value(s, h, role)
        return (value >= low) & (value <= high), value

    return check


def _constraints_for(roles: list[str], air_cooled: bool) -> list[tuple[Constraint, object]]:
    """The constraints that the present roles allow, each with its check function."""
    liquid_p = _liquid_pressure_role(roles)
    compression = ("suction_pressure", "suction_temp", "discharge_pressure", "discharge_temp")
    order = (*compression, *dict.fromkeys((liquid_p, "liquid_temp")))
    # name, description, roles, weight, residual unit, check, refined
    running = [
        ("pressure_lift", "discharge pressure at least 1.3 times suction pressure while running",
         ("suction_pressure", "discharge_pressure"), 3.0, "-", _pressure_lift, False),
        ("liquid_line_pressure",
         "liquid-line pressure at the condensing level (0.8 to 1.03 times discharge)",
         ("discharge_pressure", "liquid_pressure"), 2.0, "Pa", _liquid_line_pressure, False),
        ("suction_superheat", "suction gas at or above its dew point (superheat -1.5 to 35 K)",
         ("suction_pressure", "suction_temp"), 2.0, "K", _suction_superheat, False),
        ("liquid_subcooling", "liquid line at or below its bubble point (subcooling -1.5 to 25 K)",
         (liquid_p, "liquid_temp"), 2.0, "K", _liquid_subcooling, False),
        ("discharge_superheat",
         "discharge gas superheated (3 to 100 K above the condensing dew point)",
         ("discharge_pressure", "discharge_temp"), 2.0, "K", _discharge_superheat, False),
        ("compression",
         "discharge enthalpy above the isentropic one from the suction state "
         "(isentropic efficiency 0.3 to 1.1)",
         compression, 3.0, "-", _compression, True),
        ("enthalpy_order", "enthalpy order liquid < suction < discharge",
         order, 2.0, "J/kg", _enthalpy_order, True),
        ("evaporator_outlet", "evaporator outlet between evaporating dew point and suction + 3 K",
         ("suction_pressure", "evaporator_outlet_temp", "suction_temp"), 1.0, "K",
         _evaporator_outlet, False),
    ]  # fmt: skip
    if air_cooled:
        running += [
            ("condenser_approach",
             "condensing dew point 2 to 30 K above outdoor air (air-cooled condenser)",
             ("discharge_pressure", "outdoor_air_temp"), 2.0, "K", _condenser_approach, False),
            ("liquid_above_outdoor",
             "liquid line no colder than outdoor air - 2 K (air-cooled condenser)",
             ("liquid_temp", "outdoor_air_temp"), 1.0, "K", _liquid_above_outdoor, False),
        ]  # fmt: skip
    running += [
        (f"evaporator_approach[{air}]", f"{air} 1 to 35 K above the evaporating dew point",
         ("suction_pressure", air), 1.0, "K", _evaporator_approach(air), False)
        for air in ("return_air_temp", "box_temp")
    ]  # fmt: skip
    have = set(roles)
    out = [
        (Constraint(name, text, needs, "running", weight, unit, refined), check)
        for name, text, needs, weight, unit, check, refined in running
        if set(needs) <= have
    ]
    pressures = [r for r in roles if r in PRESSURE_ROLES]
    pipes = [r for r in roles if r in PIPE_TEMPERATURE_ROLES]
    temperatures = [r for r in roles if r in TEMPERATURE_ROLES]
    if len(pressures) >= 2:
        text = "all pressures equal at standstill (within 30 kPa or 3 %)"
        constraint = Constraint(
            "standstill_pressures_equal", text, tuple(pressures), "standstill", 3.0, "Pa"
        )
        out.append((constraint, _standstill_pressures_equal))
    if len(temperatures) >= 3:
        for role in pipes:
            text = (
                f"{role} at standstill within {STANDSTILL_PIPE_K:.0f} K of the surroundings"
                if role != "discharge_temp"
                else f"{role} at standstill from {STANDSTILL_PIPE_K:.0f} K below to "
                f"{DISCHARGE_WARM_K:.0f} K above the surroundings (the compressor cools slowly)"
            )
            needs = (role, *(t for t in temperatures if t != role))
            constraint = Constraint(
                f"standstill_temperature[{role}]", text, needs, "standstill", 2.0, "K"
            )
            out.append((constraint, _standstill_temperature(role)))
    if temperatures:
        for role in pressures:
            text = f"bubble point at {role} within 3 K of the temperatures at standstill"
            needs = (role, *temperatures)
            constraint = Constraint(
                f"standstill_saturation[{role}]", text, needs, "standstill", 3.0, "K"
            )
            out.append((constraint, _standstill_saturation(role)))
    for role in roles:
        is_pressure = role in PRESSURE_ROLES
        text = f"{role} within a physical range " + (
            "(5 kPa to 15 MPa absolute)" if is_pressure else "(-73 to 177 degC)"
        )
        constraint = Constraint(
            f"physical_range[{role}]", text, (role,), "any", 1.0, "Pa" if is_pressure else "K"
        )
        out.append((constraint, _physical_range(role)))
    return out


# --- ranking --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class RankedHypothesis:
    """A hypothesis with its score [0, 1] and its result on every constraint."""

    hypothesis: Hypothesis
    score: float
    results: tuple[ConstraintResult, ...]

    @property
    def rank_key(self) -> float:
        return self.score - PRIOR_PENALTY * self.hypothesis.cost

    def result(self, name: str) -> ConstraintResult | None:
        return next((r for r in self.results if r.constraint.name == name), None)


@dataclass
class Assignment:
    """The outcome of :func:`assign_state_points`.

    Attributes
    ----------
    ranking : hypotheses best first (the refined ones; the configuration is always among them).
    configured : the configuration's own score and results.
    decisive : the best hypothesis differs from the configuration and beats it by DECISIVE_MARGIN.
    ties : hypotheses other than the best that score within TIE_MARGIN of it.
    unchecked : what could not be checked, and why.
    hypotheses_tried : how many hypotheses the first stage scored.
    """

    refrigerant: str
    ranking: list[RankedHypothesis]
    configured: RankedHypothesis
    running_samples: int
    standstill_samples: int
    unchecked: list[str]
    hypotheses_tried: int
    roles: list[str] = field(default_factory=list)

    @property
    def best(self) -> RankedHypothesis:
        return self.ranking[0]

    @property
    def decisive(self) -> bool:
        return (
            not self.best.hypothesis.is_configured
            and self.best.score - self.configured.score >= DECISIVE_MARGIN
        )

    @property
    def ties(self) -> list[RankedHypothesis]:
        return [r for r in self.ranking[1:] if self.best.score - r.score <= TIE_MARGIN]

    def explanation(self) -> str:
        """The winner and why, in words, with the numbers that decided it."""
        best, configured = self.best, self.configured
        lines = []
        if best.hypothesis.is_configured:
            lines.append(
                f"The configuration is the most consistent assignment (score {best.score:.3f} "
                f"over {len(best.results)} checks)."
            )
        else:
            lines.append(
                f"Best fit: {best.hypothesis.describe()} (score {best.score:.3f} against "
                f"{configured.score:.3f} as configured"
                + ("" if self.decisive else "; not decisive")
                + ")."
            )
            for after in best.results:
                before = configured.result(after.constraint.name)
                if before is not None and after.fraction - before.fraction >= 0.3:
                    lines.append(
                        f"As configured, {after.constraint.description} held in "
                        f"{before.fraction:.0%} of {before.count} samples (median "
                        f"{_format(before.residual, after.constraint.residual_unit)}); "
                        f"after the change in {after.fraction:.0%} (median "
                        f"{_format(after.residual, after.constraint.residual_unit)})."
                    )
        failing = [r for r in best.results if r.fraction < CONSISTENT_FRACTION]
        for r in failing:
            lines.append(
                f"Still failing: {r.constraint.description}: {r.fraction:.0%} of {r.count} samples "
                f"(median {_format(r.residual, r.constraint.residual_unit)})."
            )
        for tie in self.ties:
            lines.append(
                f"Equally consistent alternative (score {tie.score:.3f}): "
                f"{tie.hypothesis.describe()}; the data cannot tell these apart."
            )
        lines += [f"Not checked: {reason}" for reason in self.unchecked]
        return "\n".join(lines)

    def point_verdicts(self) -> dict[str, PointVerdict]:
        """A verdict per sensor: consistent, suspect, contradicts or unchecked, with evidence."""
        verdicts = {}
        best = self.best
        for sensor in self.roles:
            role = best.hypothesis.role_of(sensor)
            fix = best.hypothesis.fix(sensor)
            # a check without a single usable sample is no evidence either way
            relevant = [r for r in best.results if role in r.constraint.roles and r.count]
            evidence = [
                f"{r.constraint.description}: {r.fraction:.0%} of {r.count} samples, median "
                f"{_format(r.residual, r.constraint.residual_unit)}"
                for r in relevant
            ]
            moved = role != sensor or fix is not None
            if moved:
                verdict = "contradicts" if self.decisive else "suspect"
                change = [f"{sensor} measures {role}"] if role != sensor else []
                change += [f"{sensor} {UNIT_FIXES[fix].description}"] if fix else []
                evidence = ["; ".join(change)] + [
                    f"as configured: {c.constraint.description}: {c.fraction:.0%}"
                    for c in self.configured.results
                    if sensor in c.constraint.roles and c.fraction < CONSISTENT_FRACTION
                ]
            elif not relevant:
                verdict = "unchecked"
                evidence = ["no check could use this point (see 'Not checked')"]
            elif min(r.fraction for r in relevant) >= CONSISTENT_FRACTION and not any(
                r.constraint.samples != "any" for r in relevant
            ):
                verdict = "unchecked"
                evidence = ["only its physical range could be checked", *evidence]
            elif min(r.fraction for r in relevant) >= CONSISTENT_FRACTION:
                verdict = "consistent"
            else:
                verdict = "suspect"
            verdicts[sensor] = PointVerdict(sensor, role, fix, verdict, evidence)
        return verdicts


@dataclass(frozen=True)
class PointVerdict:
    """One sensor's verdict. ``role`` and ``unit_fix`` say where and how it really measures."""

    sensor: str
    role: str
    unit_fix: str | None
    verdict: str
    evidence: list[str]


def _format(value: float, unit: str) -> str:
    if not math.isfinite(value):
        return "n/a"
    if unit == "Pa":
        return f"{value / 1e3:.1f} kPa"
    if unit == "J/kg":
        return f"{value / 1e3:.1f} kJ/kg"
    if unit == "K":
        return f"{value:.1f} K"
    return f"{value:.2f}"


def _evenly(index: pd.Index, limit: int) -> pd.Index:
    if len(index) <= limit:
        return index
    return index[np.linspace(0, len(index) - 1, limit).round().astype(int)]


def _present_roles(frame: pd.DataFrame) -> list[str]:
    return [r for r in CHECKED_ROLES if r in frame and frame[r].notna().any()]


def _score(ev, hyp, checks, roles, refined: bool) -> RankedHypothesis:
    results, total, weights = [], 0.0, 0.0
    for constraint, check in checks:
        if constraint.refined and not refined:
            continue
        sample_set = constraint.samples
        inputs = [ev.value(sample_set, hyp, r) for r in constraint.roles]
        valid = np.logical_and.reduce([np.isfinite(v) for v in inputs])
        count = int(valid.sum())
        if count == 0:
            fraction, residual = 0.0, float("nan")
        else:
            with np.errstate(invalid="ignore", divide="ignore"):
                ok, quantity = check(ev, hyp, sample_set, roles)
            fraction = float(np.mean(ok[valid]))
            residual = float("nan")
            if refined:  # the first stage ranks by fraction only; medians are for the report
                finite = quantity[valid][np.isfinite(quantity[valid])]
                residual = float(np.median(finite)) if finite.size else residual
        results.append(ConstraintResult(constraint, count, fraction, residual))
        total += constraint.weight * fraction
        weights += constraint.weight
    return RankedHypothesis(hyp, total / weights if weights else 0.0, tuple(results))


def assign_state_points(
    frame: pd.DataFrame,
    refrigerant,
    *,
    states: pd.Series | None = None,
    configured_units: dict[str, str] | None = None,
    atmospheric_pressure: float = 101325.0,
    air_cooled: bool = True,
    max_changes: int = 2,
) -> Assignment:
    """Find the assignment of sensors to cycle states that the physics supports best.

    Parameters
    ----------
    frame : DataFrame indexed by time (tz-aware), one column per configured role, values in SI
        units converted with the configured units (pressures [Pa] absolute, temperatures [K]);
        ``compressor_status`` [-] if available.
    refrigerant : designation or :class:`~rimewatch.physics.refrigerant.Refrigerant`.
    states : operating state per sample (:func:`standstill.operating_state`); computed if None.
    configured_units : configured unit string per role (``"degC"``, ``"bar"``, ``"psig"``...),
        which narrows the unit mix-ups worth testing; None tests all of them.
    atmospheric_pressure : [Pa], for gauge/absolute mix-ups.
    air_cooled : apply the air-cooled condenser checks (condensing above outdoor air).
    max_changes : most departures from the configuration per hypothesis.

    Returns
    -------
    Assignment
    """
    if states is None:
        states = standstill.operating_state(frame)
    roles = _present_roles(frame)
    running = _evenly(frame.index[(states == standstill.RUNNING).to_numpy()], MAX_RUNNING_SAMPLES)
    still = _evenly(
        frame.index[(states == standstill.STANDSTILL).to_numpy()], MAX_STANDSTILL_SAMPLES
    )
    both = running.append(still)
    unchecked = []
    checks = _constraints_for(roles, air_cooled)
    if len(running) < MIN_RUNNING_SAMPLES:
        unchecked.append(
            f"running checks (pressure levels, superheat, subcooling, compression): the "
            f"compressor was seen running ({standstill.MIN_RUNNING_S / 60:.0f} min or more after a "
            f"start) in {len(running)} samples, fewer than the {MIN_RUNNING_SAMPLES} needed"
        )
        checks = [(c, f) for c, f in checks if c.samples != "running"]
    if len(still) < MIN_STANDSTILL_SAMPLES:
        unchecked.append(
            f"standstill checks (equalised pressures, gauge/absolute offsets, saturation at the "
            f"surrounding temperature, refrigerant): {len(still)} samples after "
            f"{standstill.MIN_STANDSTILL_S / 60:.0f} min or more with the compressor off, fewer "
            f"than the {MIN_STANDSTILL_SAMPLES} needed"
        )
        checks = [(c, f) for c, f in checks if c.samples != "standstill"]
    for role in PRESSURE_ROLES[:2] + PIPE_TEMPERATURE_ROLES[:3]:
        if role not in roles:
            unchecked.append(f"{role}: no readings (point missing or empty)")
    if not air_cooled:
        unchecked.append("air-cooled condenser checks: the unit is not air-cooled")
    elif "outdoor_air_temp" not in roles:
        unchecked.append("condenser approach: no outdoor_air_temp point")
    ev = _Evaluator(
        frame[roles],
        refrigerant,
        {"running": running, "standstill": still, "any": both},
        atmospheric_pressure,
    )
    units = configured_units or {}
    fix_options = {}
    for role in roles:
        options = []
        for name in unit_fix_candidates(role, units.get(role)):
            corrected = UNIT_FIXES[name].correct(ev.raw["any"][role], atmospheric_pressure)
            low, high = PRESSURE_RANGE_PA if role in PRESSURE_ROLES else TEMPERATURE_RANGE_K
            median = np.nanmedian(corrected) if np.isfinite(corrected).any() else np.nan
            if low <= median <= high:
                options.append(name)
        fix_options[role] = tuple(options)
    hypotheses = enumerate_hypotheses(roles, fix_options, max_changes)
    first = [_score(ev, h, checks, roles, refined=False) for h in hypotheses]
    first.sort(key=lambda r: r.rank_key, reverse=True)
    configured_hyp = Hypothesis(tuple((r, r) for r in roles))
    shortlist = [r.hypothesis for r in first[:REFINE_TOP]]
    if configured_hyp not in shortlist:
        shortlist.append(configured_hyp)
    ranking = [_score(ev, h, checks, roles, refined=True) for h in shortlist]
    ranking.sort(key=lambda r: r.rank_key, reverse=True)
    configured = next(r for r in ranking if r.hypothesis.is_configured)
    return Assignment(
        refrigerant=props.get_refrigerant(refrigerant).designation,
        ranking=ranking,
        configured=configured,
        running_samples=len(running),
        standstill_samples=len(still),
        unchecked=unchecked,
        hypotheses_tried=len(hypotheses),
        roles=roles,
    )


def apply_hypothesis(
    frame: pd.DataFrame, hypothesis: Hypothesis, atmospheric_pressure: float = 101325.0
) -> pd.DataFrame:
    """The frame with each role's column taken from its true sensor, in the true unit."""
    out = frame.copy()
    for role, sensor in hypothesis.sources:
        values = frame[sensor].to_numpy(dtype=float)
        fix = hypothesis.fix(sensor)
        if fix is not None:
            values = UNIT_FIXES[fix].correct(values, atmospheric_pressure)
        out[role] = values
    return out


# --- refrigerant ----------------------------------------------------------------------------------


def standstill_saturation_residual(refrigerant, equalised_pressure, surrounding_temperature):
    """Bubble point at the equalised pressure minus the surrounding temperature [K].

    With the compressor off long enough and liquid in the circuit, the pressure settles at the
    saturation pressure of the liquid at its temperature, which is the surrounding temperature
    (the coldest place holding liquid, when the circuit spans two spaces) [1]_. The bubble point
    is used because at standstill almost all the refrigerant mass is liquid, which for a
    zeotropic blend keeps the bulk composition. A residual near zero supports the refrigerant;
    a large one contradicts it (or reveals a pressure offset, or a circuit with no liquid left).

    Parameters
    ----------
    equalised_pressure : [Pa] absolute.
    surrounding_temperature : [K].
    """
    t_bubble = props.saturation_temperature(refrigerant, equalised_pressure, "bubble")
    return np.asarray(t_bubble, float) - np.asarray(surrounding_temperature, float)


def condenser_approach(refrigerant, discharge_pressure, outdoor_air_temperature):
    """Condensing dew point minus outdoor air temperature [K] (air-cooled condenser).

    Common practice (from memory): an air-cooled condenser at load condenses 8 to 20 K above the
    entering air; below 2 K or above 30 K the refrigerant, a sensor or the condenser is wrong.
    """
    t_dew = props.saturation_temperature(refrigerant, discharge_pressure, "dew")
    return np.asarray(t_dew, float) - np.asarray(outdoor_air_temperature, float)


@dataclass(frozen=True)
class RefrigerantFit:
    """How well one refrigerant explains the data.

    ``residual`` [K] is the median standstill saturation residual (bubble point at the equalised
    pressure minus the coldest surroundings) over ``count`` standstill samples; ``fraction`` the
    share of them whose bubble point lies within REFRIGERANT_FIT_K of the span of surrounding
    temperatures (while liquid migrates to the coldest place, which takes hours, the pressure
    sits between the saturation pressures of the coldest and the warmest place); ``approach``
    [K] the median condenser approach while running (NaN when not available).
    """

    designation: str
    safety_class: str
    residual: float
    fraction: float
    count: int
    approach: float

    @property
    def fits(self) -> bool:
        standstill_ok = (
            self.count > 0
            and self.fraction >= REFRIGERANT_FIT_FRACTION
            and abs(self.residual) <= REFRIGERANT_FIT_K
        )
        approach_ok = not math.isfinite(self.approach) or 2.0 <= self.approach <= 30.0
        return standstill_ok and approach_ok


@dataclass
class RefrigerantCheck:
    """The configured refrigerant against the data.

    ``verdict`` is ``consistent``, ``suspect``, ``contradicts`` or ``unchecked``; ``ranking`` lists
    the supported refrigerants best first; ``equivalents`` are the fitting refrigerants the data
    cannot tell apart from the best; ``suggested`` the one to write in the site file, if any.
    """

    configured: str
    verdict: str
    ranking: list[RefrigerantFit]
    equivalents: list[str]
    suggested: str | None
    explanation: str


def _within(values: np.ndarray, limits: tuple[float, float]) -> np.ndarray:
    """``values`` with everything outside the physical ``limits`` (garbage, dropouts) as NaN."""
    return np.where((values >= limits[0]) & (values <= limits[1]), values, np.nan)


def _standstill_conditions(frame, index):
    """Equalised pressure [Pa], coldest and warmest surrounding temperature [K] per sample.

    The equalised pressure is the median of the pressure sensors. Liquid collects at the coldest
    place of the circuit, whose temperature then sets the pressure (module reference [1]): the
    coldest surrounding air (outdoor air at the condensing unit, return air or the box at the
    evaporator); without an air sensor, the coldest pipe other than the discharge line (which the
    compressor keeps warm). Values outside the physical ranges are ignored.
    """
    pressures = [r for r in PRESSURE_ROLES if r in frame]
    air = [r for r in AIR_TEMPERATURE_ROLES if r in frame]
    pipes = [r for r in PIPE_TEMPERATURE_ROLES if r in frame and r != "discharge_temp"]
    none = np.array([])
    if not pressures or not (air or pipes) or len(index) == 0:
        return none, none, none
    p = _within(frame.loc[index, pressures].to_numpy(dtype=float), PRESSURE_RANGE_PA)
    coldest, warmest = np.full(len(index), np.nan), np.full(len(index), np.nan)
    for roles in (pipes, air):  # air, where present, overrides the pipes
        if roles:
            t = _within(frame.loc[index, roles].to_numpy(dtype=float), TEMPERATURE_RANGE_K)
            t_min, t_max = np.fmin.reduce(t, axis=1), np.fmax.reduce(t, axis=1)
            coldest = np.where(np.isfinite(t_min), t_min, coldest)
            warmest = np.where(np.isfinite(t_max), t_max, warmest)
    keep = np.isfinite(p).any(axis=1) & np.isfinite(coldest)
    if not keep.any():
        return none, none, none
    return np.nanmedian(p[keep], axis=1), coldest[keep], warmest[keep]


def _fit(designation, p_eq, t_coldest, t_warmest, p_cond, t_outdoor) -> RefrigerantFit:
    fluid = props.get_refrigerant(designation)
    residual, fraction, approach = float("nan"), 0.0, float("nan")
    if p_eq.size:
        r = standstill_saturation_residual(fluid, p_eq, t_coldest)
        span = t_warmest - t_coldest
        fraction = float(np.mean((r >= -REFRIGERANT_FIT_K) & (r <= span + REFRIGERANT_FIT_K)))
        finite = r[np.isfinite(r)]
        residual = float(np.median(finite)) if finite.size else float("inf")
    if p_cond.size:
        a = condenser_approach(fluid, p_cond, t_outdoor)
        finite = a[np.isfinite(a)]
        approach = float(np.median(finite)) if finite.size else float("inf")
    return RefrigerantFit(
        fluid.designation, fluid.safety_class, residual, fraction, int(p_eq.size), approach
    )


def check_refrigerant(
    frame: pd.DataFrame,
    refrigerant,
    *,
    states: pd.Series | None = None,
    candidates=None,
    air_cooled: bool = True,
) -> RefrigerantCheck:
    """Test the configured refrigerant against standstill (and running) data; rank the others.

    Parameters
    ----------
    frame : readings by role in SI units, already corrected for wiring (see
        :func:`apply_hypothesis`).
    refrigerant : the configured refrigerant.
    states : operating state per sample; computed if None.
    candidates : designations to rank; default every supported refrigerant.
    air_cooled : whether the condenser approach to outdoor air applies.
    """
    configured = props.get_refrigerant(refrigerant).designation
    if states is None:
        states = standstill.operating_state(frame)
    still = _evenly(
        frame.index[(states == standstill.STANDSTILL).to_numpy()], MAX_STANDSTILL_SAMPLES
    )
    p_eq, t_coldest, t_warmest = _standstill_conditions(frame, still)
    if p_eq.size < MIN_STANDSTILL_SAMPLES:
        p_eq = t_coldest = t_warmest = np.array([])
    p_cond = t_outdoor = np.array([])
    running = frame.index[(states == standstill.RUNNING).to_numpy()]
    if air_cooled and {"discharge_pressure", "outdoor_air_temp"} <= set(frame.columns):
        sample = _evenly(running, MAX_STANDSTILL_SAMPLES)
        rows = frame.loc[sample, ["discharge_pressure", "outdoor_air_temp"]].dropna()
        if len(rows) >= MIN_RUNNING_SAMPLES:
            p_cond = rows["discharge_pressure"].to_numpy(dtype=float)
            t_outdoor = rows["outdoor_air_temp"].to_numpy(dtype=float)
    names = list(candidates) if candidates is not None else list(props.SUPPORTED)
    if configured not in names:
        names.append(configured)
    fits = [_fit(name, p_eq, t_coldest, t_warmest, p_cond, t_outdoor) for name in names]

    def badness(fit: RefrigerantFit) -> tuple:
        standstill_error = abs(fit.residual) if math.isfinite(fit.residual) else float("inf")
        approach_error = (
            max(2.0 - fit.approach, fit.approach - 30.0, 0.0)
            if math.isfinite(fit.approach)
            else float("inf")
        )
        return (not fit.fits, standstill_error, approach_error)

    fits.sort(key=badness)
    own = next(f for f in fits if f.designation == configured)
    fitting = [f for f in fits if f.fits]
    best = fits[0]
    equivalents = [
        f.designation
        for f in fitting
        if f is not best and abs(f.residual - best.residual) <= REFRIGERANT_TIE_K
    ]
    suggested = None
    if not p_eq.size:
        if p_cond.size and not 2.0 <= own.approach <= 30.0:
            verdict = "contradicts"
            text = (
                f"While running, {configured} gives a condensing dew point "
                f"{_format(own.approach, 'K')} above outdoor air (plausible: 2 to 30 K). No "
                f"standstill data, so no other refrigerant can be identified."
            )
        else:
            verdict = "unchecked"
            text = (
                f"No standstill period ({standstill.MIN_STANDSTILL_S / 60:.0f} min or more with "
                f"the compressor off): the refrigerant cannot be identified. "
                + (
                    f"While running, {configured} gives a plausible condenser approach "
                    f"({_format(own.approach, 'K')}), which does not prove it."
                    if p_cond.size
                    else "No condenser approach check either (no outdoor air temperature)."
                )
            )
    elif own.fits:
        verdict = "consistent"
        others = [d for d in [best.designation, *equivalents] if d != configured]
        text = (
            f"At standstill the equalised pressure matches {configured}: its bubble point lies "
            f"{_format(own.residual, 'K')} from the coldest surroundings (median over "
            f"{own.count} samples, {own.fraction:.0%} within {REFRIGERANT_FIT_K:.0f} K of the "
            f"surrounding temperatures)."
        )
        if others:
            text += (
                f" {', '.join(others)} fit equally well: standstill data cannot tell them apart, "
                f"so the nameplate must decide."
            )
    elif fitting:
        verdict = "contradicts"
        suggested = best.designation
        text = (
            f"At standstill the equalised pressure does not match {configured} (bubble point "
            f"{_format(own.residual, 'K')} from the coldest surroundings, {own.fraction:.0%} of "
            f"{own.count} samples within {REFRIGERANT_FIT_K:.0f} K of the surrounding "
            f"temperatures); {best.designation} fits (median {_format(best.residual, 'K')})."
        )
        if equivalents:
            text += (
                f" {', '.join(equivalents)} fit equally well: the data cannot tell them apart; "
                f"check the nameplate."
            )
    else:
        verdict = "suspect"
        text = (
            f"No supported refrigerant matches the standstill data ({configured}: median "
            f"residual {_format(own.residual, 'K')}). Possible causes: a pressure offset, too "
            f"little charge to hold liquid at standstill, non-condensable gases, or an unsupported "
            f"refrigerant."
        )
    return RefrigerantCheck(configured, verdict, fits, equivalents, suggested, text)


# --- the whole check ------------------------------------------------------------------------------

REQUIRED_ROLES = ("suction_pressure", "discharge_pressure", "suction_temp", "liquid_temp")


@dataclass
class UnitCommissioning:
    """Wiring, units and refrigerant of one unit, with a go / no-go for detection.

    ``blockers`` lists every reason detection should stay off; ``go`` is True only when there
    are none, so missing evidence can never pass.
    """

    assignment: Assignment
    refrigerant_check: RefrigerantCheck
    state_counts: dict[str, int]
    blockers: list[str]

    @property
    def go(self) -> bool:
        return not self.blockers


def commission_unit(
    frame: pd.DataFrame,
    refrigerant,
    *,
    states: pd.Series | None = None,
    configured_units: dict[str, str] | None = None,
    atmospheric_pressure: float = 101325.0,
    air_cooled: bool = True,
    max_changes: int = 2,
) -> UnitCommissioning:
    """Run the wiring, unit and refrigerant checks on one unit's readings.

    When the configured refrigerant contradicts the standstill data and another fits, the
    wiring is re-assessed with that refrigerant, since saturation checks depend on it.
    Parameters as :func:`assign_state_points`.
    """
    if states is None:
        states = standstill.operating_state(frame)
    options = {
        "states": states,
        "configured_units": configured_units,
        "atmospheric_pressure": atmospheric_pressure,
        "air_cooled": air_cooled,
        "max_changes": max_changes,
    }
    configured = props.get_refrigerant(refrigerant).designation
    assignment = assign_state_points(frame, configured, **options)
    ref_check = check_refrigerant(
        apply_hypothesis(frame, assignment.best.hypothesis, atmospheric_pressure),
        configured,
        states=states,
        air_cooled=air_cooled,
    )
    if ref_check.verdict not in ("consistent", "unchecked"):
        # A wrong refrigerant distorts every saturation check, so the wiring found with it is
        # not trusted (it may "fix" an air sensor's unit to fit the wrong saturation curve): the
        # wiring is searched again for the refrigerants that best fit the standstill data, as
        # stored and as corrected. A candidate whose refrigerant fits the standstill data under
        # its own wiring wins unless its wiring is decisively worse; otherwise a candidate must
        # beat the configured refrigerant's wiring by DECISIVE_MARGIN. First of equals wins.
        as_stored = check_refrigerant(frame, configured, states=states, air_cooled=False)
        candidates = dict.fromkeys(
            f.designation for f in ref_check.ranking[:2] + as_stored.ranking[:2]
        )
        trials = [
            assign_state_points(frame, candidate, **options)
            for candidate in candidates
            if candidate != configured
        ]
        fitting = [
            trial
            for trial in trials
            if check_refrigerant(
                apply_hypothesis(frame, trial.best.hypothesis, atmospheric_pressure),
                trial.refrigerant,
                states=states,
                candidates=[trial.refrigerant],
                air_cooled=air_cooled,
            ).verdict
            == "consistent"
        ]
        best_trial = max(fitting or trials, key=lambda t: t.best.rank_key, default=None)
        needed = -DECISIVE_MARGIN if fitting else DECISIVE_MARGIN
        if best_trial and best_trial.best.rank_key > assignment.best.rank_key + needed:
            assignment = best_trial
        ref_check = check_refrigerant(
            apply_hypothesis(frame, assignment.best.hypothesis, atmospheric_pressure),
            configured,
            states=states,
            air_cooled=air_cooled,
        )
        if assignment.refrigerant != configured:
            ref_check.explanation += f" The wiring was assessed with {assignment.refrigerant}."
    blockers = []
    if assignment.decisive:
        blockers.append(f"the site file needs corrections: {assignment.best.hypothesis.describe()}")
    verdicts = assignment.point_verdicts()
    for role in REQUIRED_ROLES:
        verdict = verdicts.get(role)
        if verdict is None:
            blockers.append(f"{role}: no readings; detection needs it")
        elif verdict.verdict != "consistent" and not assignment.decisive:
            blockers.append(f"{role}: {verdict.verdict}")
    if ref_check.verdict != "consistent":
        blockers.append(f"refrigerant {ref_check.configured}: {ref_check.verdict}")
    blockers += [
        f"not checked: {reason}" for reason in assignment.unchecked if "no readings" not in reason
    ]
    counts = states.value_counts()
    state_counts = {
        label: int(counts.get(label, 0))
        for label in (
            standstill.RUNNING,
            standstill.STANDSTILL,
            standstill.TRANSIENT,
            standstill.UNKNOWN,
        )
    }
    return UnitCommissioning(assignment, ref_check, state_counts, blockers)
