"""Compressor performance maps: the AHRI 540 ten-coefficient polynomial.

A map gives a compressor's refrigerant mass flow, input power and current (optionally capacity) as
a cubic polynomial of its suction and discharge dew-point temperatures S and D:

.. math::

    X = C_1 + C_2 S + C_3 D + C_4 S^2 + C_5 S D + C_6 D^2 + C_7 S^3 + C_8 D S^2 + C_9 S D^2
        + C_{10} D^3

Coefficients are published in the units the manufacturer chose (degF and lb/h, or degC and kg/h
or kg/s, ...), so a map declares its units and is evaluated in them; inputs and outputs of the
methods are SI (K, kg/s, W, A, Hz). A map holds at the rating suction condition (a suction
superheat or a return-gas temperature); :func:`density_corrected_mass_flow` moves its mass flow to
the actual suction state after Dabiri and Rice [2]. Variable-speed compressors carry one
coefficient set per speed, interpolated linearly in speed. Samples outside the map's operating
envelope come back as NaN (unless extrapolation is asked for) and :meth:`CompressorMap.in_envelope`
flags them.

References
----------
.. [1] AHRI Standard 540-2020 (I-P) / 541 (SI), "Performance Rating of Positive Displacement
   Refrigerant Compressors". Air-Conditioning, Heating, and Refrigeration Institute.
.. [2] Dabiri, A. E., Rice, C. K. (1981). "A compressor simulation model with corrections for the
   level of suction gas superheat." ASHRAE Transactions 87(2).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from rimewatch.physics import refrigerant as props

QUANTITIES = ("mass_flow", "power", "current", "capacity")
N_COEFFICIENTS = 10
DEFAULT_DENSITY_CORRECTION_FACTOR = 0.75  # F_v of Dabiri and Rice [2]

# Powers (i, j) of S^i D^j for C1 .. C10, in AHRI 540 order.
_POWERS = ((0, 0), (1, 0), (0, 1), (2, 0), (1, 1), (0, 2), (3, 0), (2, 1), (1, 2), (0, 3))

_POUND = 0.45359237  # kg, exact (international pound)
_BTU = 1055.05585262  # J, International Table Btu (exact by definition)

# unit -> (scale, offset): SI = scale * value + offset
TEMPERATURE_UNITS = {
    "K": (1.0, 0.0),
    "degC": (1.0, 273.15),
    "degF": (5.0 / 9.0, 459.67 * 5.0 / 9.0),
}
QUANTITY_UNITS = {
    "mass_flow": {
        "kg/s": 1.0,
        "kg/h": 1.0 / 3600.0,
        "g/s": 1e-3,
        "lb/h": _POUND / 3600.0,
        "lb/min": _POUND / 60.0,
        "lb/s": _POUND,
    },
    "power": {"W": 1.0, "kW": 1e3},
    "current": {"A": 1.0},
    "capacity": {"W": 1.0, "kW": 1e3, "Btu/h": _BTU / 3600.0},
}
SPEED_UNITS = {"Hz": 1.0, "rpm": 1.0 / 60.0}
SI_UNITS = {"mass_flow": "kg/s", "power": "W", "current": "A", "capacity": "W"}


class CompressorMapError(ValueError):
    """A compressor map that cannot be used; the message names the offending field."""


def ahri540_terms(suction_temp, discharge_temp) -> np.ndarray:
    """The ten AHRI 540 terms [1, S, D, S^2, S D, D^2, S^3, D S^2, S D^2, D^3], shape (n, 10)."""
    s = np.asarray(suction_temp, dtype=float).reshape(-1)
    d = np.asarray(discharge_temp, dtype=float).reshape(-1)
    return np.stack([s**i * d**j for i, j in _POWERS], axis=1)


def ahri540(coefficients, suction_temp, discharge_temp):
    """Evaluate the AHRI 540 polynomial [1] at dew-point temperatures S and D (the map's units).

    Parameters
    ----------
    coefficients : sequence of 10 floats, C1 .. C10.
    suction_temp, discharge_temp : numeric, in the temperature unit the coefficients were made for.

    Returns
    -------
    numeric
        X in the coefficients' output unit, shaped like the broadcast inputs.
    """
    c = np.asarray(coefficients, dtype=float)
    s, d = np.broadcast_arrays(np.asarray(suction_temp, float), np.asarray(discharge_temp, float))
    s2, d2 = s * s, d * d
    x = (
        c[0]
        + c[1] * s
        + c[2] * d
        + c[3] * s2
        + c[4] * s * d
        + c[5] * d2
        + c[6] * s2 * s
        + c[7] * d * s2
        + c[8] * s * d2
        + c[9] * d2 * d
    )
    return float(x) if x.ndim == 0 else x


def fit_ahri540(suction_temp, discharge_temp, values) -> np.ndarray:
    """Least-squares fit of the ten AHRI 540 coefficients [1] to a performance table.

    The terms are fitted on centred and scaled temperatures (for a well-conditioned problem) and
    the coefficients then expanded back exactly to the table's own units.

    Parameters
    ----------
    suction_temp, discharge_temp : array-like
        Suction (evaporating) and discharge (condensing) dew-point temperatures, table units.
    values : array-like
        The quantity at each point (mass flow, power, current or capacity), table units.

    Returns
    -------
    ndarray, shape (10,)
        C1 .. C10 in the table's units.

    Raises
    ------
    ValueError
        Fewer than ten finite points, or points that do not determine a cubic surface (for example
        all at one condensing temperature).
    """
    s = np.asarray(suction_temp, float).reshape(-1)
    d = np.asarray(discharge_temp, float).reshape(-1)
    y = np.asarray(values, float).reshape(-1)
    if not (s.shape == d.shape == y.shape):
        raise ValueError("suction, discharge and value arrays must have the same length")
    good = np.isfinite(s) & np.isfinite(d) & np.isfinite(y)
    if good.sum() < N_COEFFICIENTS:
        raise ValueError(
            f"an AHRI 540 fit needs at least {N_COEFFICIENTS} points with values, got {good.sum()}"
        )
    s, d, y = s[good], d[good], y[good]
    s_centre, s_scale = _centre_scale(s)
    d_centre, d_scale = _centre_scale(d)
    terms = ahri540_terms((s - s_centre) / s_scale, (d - d_centre) / d_scale)
    scaled, _, rank, _ = np.linalg.lstsq(terms, y, rcond=None)
    if rank < N_COEFFICIENTS:
        raise ValueError(
            "the points do not determine the ten AHRI 540 coefficients (they need at least four "
            "distinct suction and four distinct discharge temperatures spread over the envelope)"
        )
    # scaled variable u = (S - centre) / scale = S / scale - centre / scale
    return _substitute(
        scaled, 1.0 / s_scale, -s_centre / s_scale, 1.0 / d_scale, -d_centre / d_scale
    )


def _centre_scale(x: np.ndarray) -> tuple[float, float]:
    centre = 0.5 * (x.max() + x.min())
    half_range = 0.5 * (x.max() - x.min())
    return float(centre), float(half_range) if half_range > 0 else 1.0


def _substitute(coefficients, s_scale, s_offset, d_scale, d_offset) -> np.ndarray:
    """Coefficients of the same polynomial in new variables s, d where S = a s + b, D = c d + e.

    Exact affine change of variables: P_new = B_s^T P B_d with B[i, k] = binom(i, k) a^k b^(i-k).
    """
    matrix = np.zeros((4, 4))
    for value, (i, j) in zip(coefficients, _POWERS, strict=True):
        matrix[i, j] = value

    def binomial_map(scale, offset):
        b = np.zeros((4, 4))
        for i in range(4):
            for k in range(i + 1):
                b[i, k] = math.comb(i, k) * scale**k * offset ** (i - k)
        return b

    new = binomial_map(s_scale, s_offset).T @ matrix @ binomial_map(d_scale, d_offset)
    return np.array([new[i, j] for i, j in _POWERS])


@dataclass(frozen=True)
class Envelope:
    """A map's operating envelope in its own temperature unit.

    Attributes
    ----------
    suction : (min, max) suction dew-point temperature, or None.
    discharge : (min, max) discharge dew-point temperature, or None.
    polygon : vertices (S, D) of the envelope outline in order, or None; both bounds and polygon
        apply when both are given.
    """

    suction: tuple[float, float] | None = None
    discharge: tuple[float, float] | None = None
    polygon: tuple[tuple[float, float], ...] | None = None

    def contains(self, suction_temp, discharge_temp) -> np.ndarray:
        """True where (S, D) lies inside (boundary included); False for NaN."""
        s, d = np.broadcast_arrays(
            np.asarray(suction_temp, float), np.asarray(discharge_temp, float)
        )
        inside = np.isfinite(s) & np.isfinite(d)
        tolerance = 1e-9
        for bounds, x in ((self.suction, s), (self.discharge, d)):
            if bounds is not None:
                inside &= (x >= bounds[0] - tolerance) & (x <= bounds[1] + tolerance)
        if self.polygon is not None:
            inside &= _in_polygon(np.asarray(self.polygon, float), s, d, tolerance)
        return inside


def _in_polygon(vertices: np.ndarray, x: np.ndarray, y: np.ndarray, tolerance: float) -> np.ndarray:
    """Even-odd ray casting, with points within ``tolerance`` of an edge counted inside."""
    inside = np.zeros(x.shape, dtype=bool)
    x0, y0 = vertices[:, 0], vertices[:, 1]
    x1, y1 = np.roll(x0, -1), np.roll(y0, -1)
    edges = list(zip(x0, y0, x1, y1, strict=True))
    for ax, ay, bx, by in edges:
        if ay == by:
            continue  # a horizontal edge never crosses the ray
        crosses = (ay > y) != (by > y)
        inside ^= crosses & (x < ax + (y - ay) * ((bx - ax) / (by - ay)))
    candidates = np.flatnonzero(~inside & np.isfinite(x) & np.isfinite(y))
    if candidates.size:
        px, py = x.ravel()[candidates], y.ravel()[candidates]
        on_edge = np.zeros(candidates.size, dtype=bool)
        for ax, ay, bx, by in edges:
            length2 = max((bx - ax) ** 2 + (by - ay) ** 2, 1e-300)
            t = np.clip(((px - ax) * (bx - ax) + (py - ay) * (by - ay)) / length2, 0, 1)
            on_edge |= np.hypot(px - (ax + t * (bx - ax)), py - (ay + t * (by - ay))) <= tolerance
        inside.ravel()[candidates[on_edge]] = True
    return inside


def convex_hull(suction_temp, discharge_temp) -> tuple[tuple[float, float], ...]:
    """Convex hull of the (S, D) points, counter-clockwise (Andrew's monotone chain).

    Used as the envelope of a map fitted to a datasheet table: the map is trusted only over the
    region its table covers.
    """
    s = np.asarray(suction_temp, float).reshape(-1)
    d = np.asarray(discharge_temp, float).reshape(-1)
    pts = sorted({(float(a), float(b)) for a, b in zip(s, d, strict=True)})
    if len(pts) < 3:
        return tuple(pts)

    def cross(o, a, b):
        return (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0])

    lower: list[tuple[float, float]] = []
    upper: list[tuple[float, float]] = []
    for p in pts:
        while len(lower) >= 2 and cross(lower[-2], lower[-1], p) <= 0:
            lower.pop()
        lower.append(p)
    for p in reversed(pts):
        while len(upper) >= 2 and cross(upper[-2], upper[-1], p) <= 0:
            upper.pop()
        upper.append(p)
    return tuple(lower[:-1] + upper[:-1])


@dataclass(frozen=True)
class CompressorMap:
    """An AHRI 540 compressor map [1] with declared units, rating condition and envelope.

    Build one with :meth:`from_dict` (the unit description's ``compressor_map:`` block) or
    directly. Coefficients are kept exactly as published, in the declared units.

    Attributes
    ----------
    refrigerant : refrigerant designation the map was rated with, e.g. ``"R410A"``.
    temperature_unit : ``"degC"``, ``"degF"`` or ``"K"`` of S, D, the envelope and the rating.
    units : quantity -> output unit of its coefficients (see ``QUANTITY_UNITS``).
    coefficients : quantity -> array (n_speeds, 10), C1 .. C10 per speed.
    envelope : operating envelope, in ``temperature_unit``.
    rated_superheat : rating suction superheat, in degrees of ``temperature_unit``; or None.
    rated_return_gas_temp : rating return-gas (suction) temperature in ``temperature_unit``;
        exactly one of the two is set.
    speeds : the speeds of the coefficient sets in ``speed_unit`` (empty for a fixed speed).
    speed_unit : ``"Hz"`` or ``"rpm"``.
    density_correction_factor : F_v of Dabiri and Rice [2].
    model, source : free text (compressor model, datasheet reference).
    """

    refrigerant: str
    temperature_unit: str
    units: Mapping[str, str]
    coefficients: Mapping[str, np.ndarray]
    envelope: Envelope
    rated_superheat: float | None = None
    rated_return_gas_temp: float | None = None
    speeds: tuple[float, ...] = ()
    speed_unit: str = "Hz"
    density_correction_factor: float = DEFAULT_DENSITY_CORRECTION_FACTOR
    model: str = ""
    source: str = ""

    def __post_init__(self):
        _validate(self)

    # ---- evaluation (SI in, SI out) ----

    def _map_temperature(self, kelvin):
        scale, offset = TEMPERATURE_UNITS[self.temperature_unit]
        return (np.asarray(kelvin, float) - offset) / scale

    def _speed_in_map_units(self, speed_hz):
        return np.asarray(speed_hz, float) / SPEED_UNITS[self.speed_unit]

    @property
    def variable_speed(self) -> bool:
        """True when the map has coefficient sets at several speeds."""
        return len(self.speeds) > 1

    def evaluate(self, quantity, t_suction_dew, t_discharge_dew, speed=None, extrapolate=False):
        """A quantity from the map, in SI, at the rating suction condition.

        Parameters
        ----------
        quantity : ``"mass_flow"`` [kg/s], ``"power"`` [W], ``"current"`` [A] or ``"capacity"`` [W].
        t_suction_dew, t_discharge_dew : numeric
            Suction and discharge dew-point temperatures [K].
        speed : numeric, optional
            Compressor speed [Hz]; required for a variable-speed map. Between two mapped speeds the
            two polynomials are interpolated linearly in speed.
        extrapolate : bool
            False (default): NaN outside the envelope (and outside the mapped speed range).

        Returns
        -------
        ndarray or float
        """
        if quantity not in self.coefficients:
            raise CompressorMapError(
                f"compressor map has no {quantity} coefficients; it has: "
                f"{', '.join(self.coefficients)}"
            )
        s = self._map_temperature(t_suction_dew)
        d = self._map_temperature(t_discharge_dew)
        sets = self.coefficients[quantity]
        if self.variable_speed:
            value = self._interpolate_speed(sets, s, d, speed, extrapolate)
        else:
            value = np.asarray(ahri540(sets[0], s, d), float)
        value = value * QUANTITY_UNITS[quantity][self.units[quantity]]
        if not extrapolate:
            value = np.where(self.in_envelope(t_suction_dew, t_discharge_dew, speed), value, np.nan)
        return float(value) if np.ndim(value) == 0 else value

    def _interpolate_speed(self, sets, s, d, speed, extrapolate):
        if speed is None:
            raise CompressorMapError(
                "this compressor map has several speeds; give the compressor speed [Hz]"
            )
        x = self._speed_in_map_units(speed)
        grid = np.asarray(self.speeds)
        upper = np.clip(np.searchsorted(grid, x), 1, len(grid) - 1)
        lower = upper - 1
        weight = (x - grid[lower]) / (grid[upper] - grid[lower])
        if not extrapolate:
            weight = np.where((x >= grid[0]) & (x <= grid[-1]), weight, np.nan)
        by_speed = np.stack([np.asarray(ahri540(c, s, d), float) for c in sets])
        low = np.take_along_axis(by_speed, np.broadcast_to(lower, by_speed.shape[1:])[None], 0)[0]
        high = np.take_along_axis(by_speed, np.broadcast_to(upper, by_speed.shape[1:])[None], 0)[0]
        return low + weight * (high - low)

    def mass_flow(self, t_suction_dew, t_discharge_dew, speed=None, extrapolate=False):
        """Map mass flow [kg/s] at the rating suction condition (see :meth:`evaluate`)."""
        return self.evaluate("mass_flow", t_suction_dew, t_discharge_dew, speed, extrapolate)

    def power(self, t_suction_dew, t_discharge_dew, speed=None, extrapolate=False):
        """Map input power [W] (see :meth:`evaluate`)."""
        return self.evaluate("power", t_suction_dew, t_discharge_dew, speed, extrapolate)

    def current(self, t_suction_dew, t_discharge_dew, speed=None, extrapolate=False):
        """Map current [A] (see :meth:`evaluate`)."""
        return self.evaluate("current", t_suction_dew, t_discharge_dew, speed, extrapolate)

    def in_envelope(self, t_suction_dew, t_discharge_dew, speed=None) -> np.ndarray:
        """True where (S, D) [K] lies in the envelope and speed [Hz] in the mapped range."""
        inside = self.envelope.contains(
            self._map_temperature(t_suction_dew), self._map_temperature(t_discharge_dew)
        )
        if self.variable_speed:
            if speed is None:
                raise CompressorMapError(
                    "this compressor map has several speeds; give the compressor speed [Hz]"
                )
            x = self._speed_in_map_units(speed)
            inside = inside & (x >= self.speeds[0]) & (x <= self.speeds[-1])
        return np.asarray(inside)

    def rated_suction_temperature(self, t_suction_dew):
        """Suction gas temperature [K] of the rating condition at suction dew point S [K]."""
        scale, offset = TEMPERATURE_UNITS[self.temperature_unit]
        if self.rated_superheat is not None:
            return np.asarray(t_suction_dew, float) + self.rated_superheat * scale
        rated = self.rated_return_gas_temp * scale + offset
        return np.broadcast_to(rated, np.shape(t_suction_dew)).astype(float)

    # ---- unit conversion ----

    def converted(self, temperature_unit: str | None = None, **units: str) -> CompressorMap:
        """The same map with coefficients re-expressed exactly in other units.

        ``converted("degC", mass_flow="kg/h")`` rewrites every polynomial by an exact affine change
        of variables and output scaling; rating and envelope are converted too.
        """
        target_t = temperature_unit or self.temperature_unit
        _check_choice(target_t, TEMPERATURE_UNITS, "units.temperature")
        new_units = dict(self.units)
        for quantity, unit in units.items():
            if quantity not in self.units:
                raise CompressorMapError(f"compressor map has no {quantity} coefficients")
            _check_choice(unit, QUANTITY_UNITS[quantity], f"units.{quantity}")
            new_units[quantity] = unit
        old_scale, old_offset = TEMPERATURE_UNITS[self.temperature_unit]
        new_scale, new_offset = TEMPERATURE_UNITS[target_t]
        # old value = a * new value + b, from K = scale * value + offset on both sides
        a = new_scale / old_scale
        b = (new_offset - old_offset) / old_scale
        coefficients = {}
        for quantity, sets in self.coefficients.items():
            factor = (
                QUANTITY_UNITS[quantity][self.units[quantity]]
                / QUANTITY_UNITS[quantity][new_units[quantity]]
            )
            coefficients[quantity] = np.stack([factor * _substitute(c, a, b, a, b) for c in sets])

        def temp(x):
            return (x - b) / a

        env = self.envelope
        envelope = Envelope(
            suction=None if env.suction is None else tuple(temp(x) for x in env.suction),
            discharge=None if env.discharge is None else tuple(temp(x) for x in env.discharge),
            polygon=None
            if env.polygon is None
            else tuple((temp(s), temp(d)) for s, d in env.polygon),
        )
        return CompressorMap(
            refrigerant=self.refrigerant,
            temperature_unit=target_t,
            units=new_units,
            coefficients=coefficients,
            envelope=envelope,
            rated_superheat=None if self.rated_superheat is None else self.rated_superheat / a,
            rated_return_gas_temp=(
                None if self.rated_return_gas_temp is None else temp(self.rated_return_gas_temp)
            ),
            speeds=self.speeds,
            speed_unit=self.speed_unit,
            density_correction_factor=self.density_correction_factor,
            model=self.model,
            source=self.source,
        )

    # ---- the unit description's `compressor_map:` block ----

    @classmethod
    def from_dict(cls, mapping: Mapping, where: str = "compressor_map") -> CompressorMap:
        """Build a map from its dictionary (YAML) form; errors name the field, e.g.
        ``compressor_map.coefficients.power: expected 10 numbers, got 9``.

        Layout (fixed speed; see docs/compressor-maps.md)::

            refrigerant: R410A
            units: {temperature: degF, mass_flow: lb/h, power: W, current: A}
            rating: {suction_superheat: 20}        # or {return_gas_temp: 65}
            envelope: {suction: [-10, 55], discharge: [80, 150], polygon: [[S, D], ...]}
            coefficients: {mass_flow: [C1, ..., C10], power: [...], current: [...]}

        A variable-speed map replaces ``coefficients`` by
        ``speeds: [{speed: 30, coefficients: {...}}, ...]`` and declares ``units.speed``.
        """
        if not isinstance(mapping, Mapping):
            raise CompressorMapError(f"{where}: expected a mapping, got {type(mapping).__name__}")
        known = {
            "refrigerant", "units", "rating", "envelope", "coefficients", "speeds",
            "density_correction_factor", "model", "source",
        }  # fmt: skip
        unknown = sorted(set(mapping) - known)
        if unknown:
            raise CompressorMapError(
                f"{where}: unknown field(s) {', '.join(unknown)}; known: {', '.join(sorted(known))}"
            )
        refrigerant = mapping.get("refrigerant")
        if not isinstance(refrigerant, str) or not refrigerant.strip():
            raise CompressorMapError(f"{where}.refrigerant: missing (e.g. R410A)")
        units = mapping.get("units")
        if not isinstance(units, Mapping):
            raise CompressorMapError(
                f"{where}.units: missing; declare e.g. "
                "{temperature: degF, mass_flow: lb/h, power: W}"
            )
        temperature_unit = units.get("temperature")
        _check_choice(temperature_unit, TEMPERATURE_UNITS, f"{where}.units.temperature")
        speed_unit = units.get("speed", "Hz")
        _check_choice(speed_unit, SPEED_UNITS, f"{where}.units.speed")
        for key in units:
            if key not in (*QUANTITIES, "temperature", "speed"):
                raise CompressorMapError(
                    f"{where}.units.{key}: unknown quantity; known: "
                    f"temperature, speed, {', '.join(QUANTITIES)}"
                )

        if "speeds" in mapping and "coefficients" in mapping:
            raise CompressorMapError(f"{where}: give either coefficients or speeds, not both")
        if "speeds" in mapping:
            entries = mapping["speeds"]
            if not isinstance(entries, Sequence) or isinstance(entries, str) or len(entries) < 2:
                raise CompressorMapError(
                    f"{where}.speeds: expected a list of 2+ {{speed, coefficients}} entries"
                )
            speeds = []
            sets = []
            for k, entry in enumerate(entries):
                here = f"{where}.speeds[{k}]"
                if not isinstance(entry, Mapping):
                    raise CompressorMapError(
                        f"{here}: expected a mapping with speed and coefficients"
                    )
                speeds.append(_number(entry.get("speed"), f"{here}.speed"))
                sets.append(_coefficient_block(entry.get("coefficients"), f"{here}.coefficients"))
            names = set(sets[0])
            for k, block in enumerate(sets):
                if set(block) != names:
                    raise CompressorMapError(
                        f"{where}.speeds[{k}].coefficients: must list the same quantities as "
                        f"speeds[0] ({', '.join(sorted(names))})"
                    )
            order = np.argsort(speeds)
            speeds = [speeds[i] for i in order]
            if len(set(speeds)) != len(speeds) or speeds[0] <= 0:
                raise CompressorMapError(f"{where}.speeds: speeds must be positive and distinct")
            coefficients = {q: np.stack([sets[i][q] for i in order]) for q in names}
        else:
            block = _coefficient_block(mapping.get("coefficients"), f"{where}.coefficients")
            coefficients = {q: c[None, :] for q, c in block.items()}
            speeds = []
        quantity_units = {}
        for quantity in coefficients:
            unit = units.get(quantity)
            if unit is None:
                raise CompressorMapError(
                    f"{where}.units.{quantity}: missing; "
                    f"known: {', '.join(QUANTITY_UNITS[quantity])}"
                )
            _check_choice(unit, QUANTITY_UNITS[quantity], f"{where}.units.{quantity}")
            quantity_units[quantity] = unit

        rating = mapping.get("rating")
        if not isinstance(rating, Mapping) or len(rating) != 1:
            raise CompressorMapError(
                f"{where}.rating: give exactly one of suction_superheat or return_gas_temp "
                f"(in the map's temperature unit)"
            )
        ((rating_kind, rating_value),) = rating.items()
        if rating_kind not in ("suction_superheat", "return_gas_temp"):
            raise CompressorMapError(
                f"{where}.rating.{rating_kind}: unknown; use suction_superheat or return_gas_temp"
            )
        rating_value = _number(rating_value, f"{where}.rating.{rating_kind}")

        factor = mapping.get("density_correction_factor", DEFAULT_DENSITY_CORRECTION_FACTOR)
        return cls(
            refrigerant=refrigerant.strip(),
            temperature_unit=temperature_unit,
            units=quantity_units,
            coefficients=coefficients,
            envelope=_envelope(mapping.get("envelope"), f"{where}.envelope"),
            rated_superheat=rating_value if rating_kind == "suction_superheat" else None,
            rated_return_gas_temp=rating_value if rating_kind == "return_gas_temp" else None,
            speeds=tuple(speeds),
            speed_unit=speed_unit,
            density_correction_factor=_number(factor, f"{where}.density_correction_factor"),
            model=str(mapping.get("model", "")),
            source=str(mapping.get("source", "")),
        )

    def to_dict(self) -> dict:
        """The dictionary (YAML) form read by :meth:`from_dict`; plain Python types only."""
        out: dict = {}
        if self.model:
            out["model"] = self.model
        if self.source:
            out["source"] = self.source
        out["refrigerant"] = self.refrigerant
        units = {"temperature": self.temperature_unit, **self.units}
        if self.variable_speed:
            units["speed"] = self.speed_unit
        out["units"] = units
        if self.rated_superheat is not None:
            out["rating"] = {"suction_superheat": float(self.rated_superheat)}
        else:
            out["rating"] = {"return_gas_temp": float(self.rated_return_gas_temp)}
        if self.density_correction_factor != DEFAULT_DENSITY_CORRECTION_FACTOR:
            out["density_correction_factor"] = float(self.density_correction_factor)
        envelope: dict = {}
        if self.envelope.suction is not None:
            envelope["suction"] = [float(x) for x in self.envelope.suction]
        if self.envelope.discharge is not None:
            envelope["discharge"] = [float(x) for x in self.envelope.discharge]
        if self.envelope.polygon is not None:
            envelope["polygon"] = [[float(s), float(d)] for s, d in self.envelope.polygon]
        out["envelope"] = envelope

        def block(k):
            return {q: [float(x) for x in c[k]] for q, c in self.coefficients.items()}

        if self.variable_speed:
            out["speeds"] = [
                {"speed": float(v), "coefficients": block(k)} for k, v in enumerate(self.speeds)
            ]
        else:
            out["coefficients"] = block(0)
        return out


def _check_choice(value, choices, where):
    if value not in choices:
        shown = "missing" if value is None else f"unknown unit {value!r}"
        raise CompressorMapError(f"{where}: {shown}; known: {', '.join(choices)}")


def _number(value, where) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        shown = "missing" if value is None else f"not a number ({value!r})"
        raise CompressorMapError(f"{where}: {shown}")
    if not math.isfinite(float(value)):
        raise CompressorMapError(f"{where}: not finite ({value!r})")
    return float(value)


def _coefficient_block(block, where) -> dict[str, np.ndarray]:
    if not isinstance(block, Mapping) or not block:
        raise CompressorMapError(
            f"{where}: missing; give mass_flow (and power, current) as lists of 10 numbers"
        )
    out = {}
    for quantity, values in block.items():
        if quantity not in QUANTITIES:
            raise CompressorMapError(
                f"{where}.{quantity}: unknown quantity; known: {', '.join(QUANTITIES)}"
            )
        if not isinstance(values, Sequence) or isinstance(values, str):
            raise CompressorMapError(f"{where}.{quantity}: expected a list of 10 numbers")
        if len(values) != N_COEFFICIENTS:
            raise CompressorMapError(
                f"{where}.{quantity}: expected 10 numbers (C1..C10), got {len(values)}"
            )
        out[quantity] = np.array(
            [_number(v, f"{where}.{quantity}[C{k + 1}]") for k, v in enumerate(values)]
        )
    if "mass_flow" not in out:
        raise CompressorMapError(f"{where}.mass_flow: missing (the map needs mass flow)")
    return out


def _envelope(block, where) -> Envelope:
    if not isinstance(block, Mapping) or not block:
        raise CompressorMapError(
            f"{where}: missing; give suction and discharge bounds [min, max] and/or a polygon "
            "[[S, D], ...] from the datasheet's operating envelope (never extrapolate a map)"
        )
    unknown = sorted(set(block) - {"suction", "discharge", "polygon"})
    if unknown:
        raise CompressorMapError(f"{where}.{unknown[0]}: unknown; use suction, discharge, polygon")

    def bounds(name):
        value = block.get(name)
        if value is None:
            return None
        if not isinstance(value, Sequence) or isinstance(value, str) or len(value) != 2:
            raise CompressorMapError(f"{where}.{name}: expected [min, max]")
        low, high = (_number(v, f"{where}.{name}[{k}]") for k, v in enumerate(value))
        if not low < high:
            raise CompressorMapError(f"{where}.{name}: min {low} must be below max {high}")
        return (low, high)

    polygon = block.get("polygon")
    if polygon is not None:
        if not isinstance(polygon, Sequence) or isinstance(polygon, str) or len(polygon) < 3:
            raise CompressorMapError(f"{where}.polygon: expected at least three [S, D] vertices")
        vertices = []
        for k, vertex in enumerate(polygon):
            if not isinstance(vertex, Sequence) or isinstance(vertex, str) or len(vertex) != 2:
                raise CompressorMapError(f"{where}.polygon[{k}]: expected [S, D]")
            vertices.append(tuple(_number(v, f"{where}.polygon[{k}]") for v in vertex))
        polygon = tuple(vertices)
    return Envelope(suction=bounds("suction"), discharge=bounds("discharge"), polygon=polygon)


def _validate(cmap: CompressorMap) -> None:
    """Checks for maps built directly rather than through from_dict."""
    _check_choice(cmap.temperature_unit, TEMPERATURE_UNITS, "units.temperature")
    _check_choice(cmap.speed_unit, SPEED_UNITS, "units.speed")
    if "mass_flow" not in cmap.coefficients:
        raise CompressorMapError("coefficients.mass_flow: missing (the map needs mass flow)")
    n_sets = max(len(cmap.speeds), 1)
    for quantity, sets in cmap.coefficients.items():
        if quantity not in QUANTITIES:
            raise CompressorMapError(f"coefficients.{quantity}: unknown quantity")
        _check_choice(cmap.units.get(quantity), QUANTITY_UNITS[quantity], f"units.{quantity}")
        array = np.asarray(sets, float)
        if array.shape != (n_sets, N_COEFFICIENTS) or not np.isfinite(array).all():
            raise CompressorMapError(
                f"coefficients.{quantity}: expected {n_sets} set(s) of 10 finite numbers"
            )
    if (cmap.rated_superheat is None) == (cmap.rated_return_gas_temp is None):
        raise CompressorMapError("rating: give exactly one of suction_superheat or return_gas_temp")
    if not 0.0 <= cmap.density_correction_factor <= 1.0:
        raise CompressorMapError(
            f"density_correction_factor: {cmap.density_correction_factor} outside [0, 1]"
        )
    if list(cmap.speeds) != sorted(cmap.speeds):
        raise CompressorMapError("speeds: must be in increasing order")


def dabiri_rice_factor(
    suction_density, rated_suction_density, factor=DEFAULT_DENSITY_CORRECTION_FACTOR
):
    """Suction-density correction multiplier of Dabiri and Rice [2].

    .. math::

        \\frac{\\dot m}{\\dot m_{map}} = 1 + F_v \\left(\\frac{v_{rated}}{v_{actual}} - 1\\right)
        = 1 + F_v \\left(\\frac{\\rho_{actual}}{\\rho_{rated}} - 1\\right)

    Parameters
    ----------
    suction_density : numeric
        Density of the actual suction gas [kg/m^3].
    rated_suction_density : numeric
        Density at the map's rating suction condition, same suction pressure [kg/m^3].
    factor : float
        F_v [-], 0.75 by default [2]; 1 means mass flow proportional to suction density.

    Returns
    -------
    numeric
        Exactly 1 at the rating condition; below 1 with more superheat (lighter gas).
    """
    ratio = np.asarray(suction_density, float) / np.asarray(rated_suction_density, float)
    out = 1.0 + factor * (ratio - 1.0)
    return float(out) if out.ndim == 0 else out


def density_corrected_mass_flow(
    mass_flow_map, suction_density, rated_suction_density, factor=DEFAULT_DENSITY_CORRECTION_FACTOR
):
    """Map mass flow [kg/s] moved to the actual suction density after Dabiri and Rice [2].

    ``mass_flow_map * dabiri_rice_factor(suction_density, rated_suction_density, factor)``.
    """
    return np.asarray(mass_flow_map, float) * dabiri_rice_factor(
        suction_density, rated_suction_density, factor
    )


def mass_flow_from_capacity(
    refrigerant, t_suction_dew, t_discharge_dew, capacity, rated_suction_temp, rated_subcooling
):
    """Mass flow [kg/s] behind a rated capacity [W]: m = Q / (h1 - h3) (AHRI 540 rating basis).

    h1 is the suction gas at the rating suction temperature [K] and the suction dew pressure; h3 the
    liquid leaving the condenser ``rated_subcooling`` [K] below the bubble point at the discharge
    dew pressure (expansion is isenthalpic, so h4 = h3). Uses CoolProp's full equation of state.
    """
    p_s = props.saturation_pressure(refrigerant, t_suction_dew, "dew")
    p_d = props.saturation_pressure(refrigerant, t_discharge_dew, "dew")
    h1 = props.enthalpy(refrigerant, p_s, rated_suction_temp)
    t_liquid = (
        np.asarray(props.saturation_temperature(refrigerant, p_d, "bubble")) - rated_subcooling
    )
    h3 = props.enthalpy(refrigerant, p_d, t_liquid)
    return np.asarray(capacity, float) / (h1 - h3)


def fit_map(
    suction_temp,
    discharge_temp,
    values: Mapping[str, np.ndarray],
    units: Mapping[str, str],
    *,
    refrigerant: str,
    temperature_unit: str,
    rated_superheat: float | None = None,
    rated_return_gas_temp: float | None = None,
    speed=None,
    speed_unit: str = "Hz",
    model: str = "",
    source: str = "",
) -> CompressorMap:
    """Fit a :class:`CompressorMap` to a performance table, one AHRI 540 fit per quantity and speed.

    Parameters
    ----------
    suction_temp, discharge_temp : array-like
        Dew-point temperatures of the table rows, in ``temperature_unit``.
    values : quantity -> array-like
        Table columns (``mass_flow``, ``power``, ``current``, ``capacity``); NaN where the table
        has no value. ``mass_flow`` is required.
    units : quantity -> unit of that column (see ``QUANTITY_UNITS``).
    speed : array-like, optional
        Speed of each row (``speed_unit``) for a variable-speed table; one map per distinct speed.

    The envelope is the convex hull of the table's (S, D) points: the map is never trusted
    beyond the region its table covers.
    """
    s = np.asarray(suction_temp, float).reshape(-1)
    d = np.asarray(discharge_temp, float).reshape(-1)
    speeds = [None] if speed is None else sorted(set(np.asarray(speed, float).tolist()))
    coefficients: dict[str, list[np.ndarray]] = {q: [] for q in values}
    for level in speeds:
        rows = np.ones(s.shape, bool) if level is None else np.asarray(speed, float) == level
        for quantity, column in values.items():
            try:
                fitted = fit_ahri540(s[rows], d[rows], np.asarray(column, float)[rows])
            except ValueError as error:
                where = quantity if level is None else f"{quantity} at speed {level:g} {speed_unit}"
                raise CompressorMapError(f"{where}: {error}") from error
            coefficients[quantity].append(fitted)
    good = np.isfinite(s) & np.isfinite(d)
    return CompressorMap(
        refrigerant=refrigerant,
        temperature_unit=temperature_unit,
        units=dict(units),
        coefficients={q: np.stack(c) for q, c in coefficients.items()},
        envelope=Envelope(polygon=convex_hull(s[good], d[good])),
        rated_superheat=rated_superheat,
        rated_return_gas_temp=rated_return_gas_temp,
        speeds=() if speed is None else tuple(speeds),
        speed_unit=speed_unit,
        model=model,
        source=source,
    )


def fit_errors(cmap: CompressorMap, suction_temp, discharge_temp, values, speed=None):
    """Relative errors [%] of a map against table values, in the map's own units.

    Parameters as :func:`fit_map`. Returns quantity -> array of 100 (map - table) / table, NaN
    where the table has no value.
    """
    scale, offset = TEMPERATURE_UNITS[cmap.temperature_unit]
    t_s = np.asarray(suction_temp, float) * scale + offset
    t_d = np.asarray(discharge_temp, float) * scale + offset
    speed_hz = None if speed is None else np.asarray(speed, float) * SPEED_UNITS[cmap.speed_unit]
    errors = {}
    for quantity, column in values.items():
        table = np.asarray(column, float)
        mapped = cmap.evaluate(quantity, t_s, t_d, speed_hz, extrapolate=True)
        mapped = mapped / QUANTITY_UNITS[quantity][cmap.units[quantity]]
        errors[quantity] = 100.0 * (mapped - table) / table
    return errors
