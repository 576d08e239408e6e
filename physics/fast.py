"""Fast refrigerant properties for long time series: CoolProp tables evaluated with numpy.

The functions here have the names, arguments and units of :mod:`rimewatch.physics.refrigerant`
(SI, absolute: Pa, K, J/kg, J/(kg K), kg/m^3) and agree with it to within 0.01 K on saturation
temperatures and 0.05 kJ/kg on enthalpies over the operating envelope (evaporating -45 to +20 degC,
condensing 10 to 65 degC, superheat to 60 K, discharge to 130 degC); ``tests/physics/test_fast.py``
measures it. They are about two orders of magnitude faster because every property is looked up in a
table computed once per refrigerant from CoolProp's full equation of state and interpolated with
tensor-product cubic Lagrange polynomials over a uniform grid.

Table coordinates follow the saturation lines so that no table straddles the two-phase dome:

* saturation properties against ``u = ln p``, on the same pressure grid as the 2-D tables (so
  each pressure array is located on the grid once for all of them);
* superheated vapour against ``u`` and the square root of the superheat ``T - T_dew(p)``;
* subcooled liquid against ``u`` and the square root of the subcooling ``T_bubble(p) - T``;
  (the square root packs nodes near the saturation line, where near the critical point the
  heat capacity, and so the curvature of ``h(T)``, grows without bound);
* the isentropic end state ``h(p, s)`` against ``u`` and ``s - s_dew(p)`` (inside the dome, below
  ``s_dew``, the lever rule between the saturated states gives ``h``).

Any sample outside the tables (above the highest tabulated saturation pressure, near or beyond the
critical point, hotter than the tables reach) is computed with the exact path instead, so results
are never extrapolated. Tables are cached on disk per refrigerant, keyed by the CoolProp version
and the table layout, in ``$RIMEWATCH_CACHE_DIR`` or ``~/.cache/rimewatch``.

References
----------
.. [1] Bell, I. H. et al. (2014). "Pure and Pseudo-pure Fluid Thermophysical Property Evaluation and
   the Open-Source Thermophysical Property Library CoolProp." Ind. Eng. Chem. Res. 53(6): 2498-2508.
   :doi:`10.1021/ie4033999` (section on tabular interpolation, which motivates this layout).
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

from rimewatch.physics import refrigerant as exact
from rimewatch.physics.refrigerant import (
    COOLPROP_VERSION,
    Phase,
    Refrigerant,
    cache_directory,
    coolprop,
    get_refrigerant,
    load_arrays,
    save_arrays,
)

TABLE_LAYOUT = 4  # bump when the grids below change, so cached tables are rebuilt

LOWEST_TEMPERATURE = 213.15  # K (-60 degC), or just above the triple point if that is higher
HIGHEST_SATURATION = 353.15  # K (80 degC), or 3 K below the critical temperature if lower
PRESSURE_NODES = 180
SUPERHEAT_SPAN = 200.0  # K above the dew point covered by the vapour table
SUPERHEAT_NODES = 161
SUBCOOLING_SPAN = 90.0  # K below the bubble point covered by the liquid table
SUBCOOLING_NODES = 81
ENTROPY_SPAN = 700.0  # J/(kg K) above s_dew covered by the isentropic table
ENTROPY_NODES = 101


SATURATION_NAMES = ("T_dew", "T_bubble", "h_dew", "h_bubble", "s_dew", "s_bubble")
PHASE_NAMES = ("h", "s", "ln_rho")


@dataclass(frozen=True)
class _Axis:
    """A uniform grid axis: ``start + step * k`` for ``k`` in ``range(nodes)``."""

    start: float
    step: float
    nodes: int

    @property
    def stop(self) -> float:
        return self.start + self.step * (self.nodes - 1)

    def values(self) -> np.ndarray:
        return self.start + self.step * np.arange(self.nodes)

    def contains(self, x: np.ndarray) -> np.ndarray:
        return (x >= self.start) & (x <= self.stop)

    def locate(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Index of the stencil's second node and the four cubic Lagrange weights for ``x``,
        shape (4, n).

        Samples outside the axis (and NaN) get an edge stencil; callers mask them.
        """
        q = x - self.start
        q *= 1.0 / self.step
        i = np.floor(q)
        np.fmax(i, 1.0, out=i)  # fmax/fmin map NaN to the bound
        np.fmin(i, self.nodes - 3.0, out=i)
        t = q
        t -= i
        # w_k = c_k prod_{m != k} (t - t_m), nodes t_m = -1, 0, 1, 2; rows of `to_node`: t - 2,
        # t - 1, t, t + 1; `pairs`: t (t - 1) and (t + 1) (t - 2)
        to_node = t + _NODE_SHIFTS
        pairs = to_node[2:] * to_node[1::-1]
        weights = pairs.take(_PAIR_OF_WEIGHT, axis=0)
        weights *= to_node
        weights *= _WEIGHT_FACTORS
        return i.astype(np.intp), weights


# Cubic Lagrange weights on the nodes -1, 0, 1, 2 (see _Axis.locate).
_NODE_SHIFTS = np.array([[-2.0], [-1.0], [0.0], [1.0]])
_PAIR_OF_WEIGHT = np.array([0, 1, 1, 0])
_WEIGHT_FACTORS = np.array([[-1.0 / 6.0], [0.5], [-0.5], [1.0 / 6.0]])
#: Offsets of a stencil's 4 nodes from its second node.
_NODES_1D = np.arange(-1, 3)[:, None]


class _Stencil:
    """Where samples fall on a 1-D or 2-D grid: flat indices of the 4 (or 4 x 4) nodes around
    each sample and their weights.

    Computed once and applied to every property tabulated on the same grid.
    """

    def __init__(self, rows, x=None, col_axis: _Axis | None = None, y=None):
        """``rows`` is an axis located at ``x``, or a ``(index, weights)`` pair already located."""
        i, self.wx = rows.locate(x) if isinstance(rows, _Axis) else rows
        if col_axis is None:
            self.wy = None
            self.index = i + _NODES_1D  # (4, n)
        else:
            j, self.wy = col_axis.locate(y)
            second_node = i * col_axis.nodes + j
            self.index = second_node + _nodes_2d(col_axis.nodes)  # (16, n): node (a, b) at 4a + b

    def apply(self, flat_table: np.ndarray) -> np.ndarray:
        """Interpolate a C-contiguous table, flattened, at the stencil's samples.

        Sums in a fixed order: sum_a wx_a (sum_b wy_b f_ab), the outer sum from zero.
        """
        nodes = flat_table.take(self.index)
        if self.wy is None:
            nodes *= self.wx
            return _sum_rows(nodes)
        nodes = nodes.reshape(4, 4, -1)
        nodes *= self.wy
        rows = nodes[:, 0] + nodes[:, 1]
        rows += nodes[:, 2]
        rows += nodes[:, 3]
        rows *= self.wx
        out = np.zeros(rows.shape[1])
        for row in rows:
            out += row
        return out


def _sum_rows(values: np.ndarray) -> np.ndarray:
    """``((values[0] + values[1]) + values[2]) + values[3]`` for an array of 4 rows."""
    out = values[0] + values[1]
    out += values[2]
    out += values[3]
    return out


@lru_cache(maxsize=8)
def _nodes_2d(stride: int) -> np.ndarray:
    """Flat offsets (16, 1) of the 4 x 4 nodes of a stencil on a grid of ``stride`` columns, from
    its second node in both directions."""
    return (np.arange(-1, 3)[:, None] * stride + np.arange(-1, 3)).reshape(16, 1)


@dataclass
class PropertyTables:
    """Tabulated properties of one refrigerant (see the module docstring for the coordinates)."""

    refrigerant: Refrigerant
    pressure_axis: _Axis  # ln p, shared by every table
    saturation: np.ndarray  # (p, 6): T_dew, T_bubble, h_dew, h_bubble, s_dew, s_bubble
    superheat_axis: _Axis
    vapour: np.ndarray  # (p, superheat, 3): h, s, ln rho
    subcooling_axis: _Axis
    liquid: np.ndarray  # (p, subcooling, 3): h, s, ln rho
    entropy_axis: _Axis
    isentropic: np.ndarray  # (p, s - s_dew, 1): h

    def __post_init__(self):
        columns = {
            **{name: self.saturation[:, k] for k, name in enumerate(SATURATION_NAMES)},
            **{f"vapour_{name}": self.vapour[:, :, k] for k, name in enumerate(PHASE_NAMES)},
            **{f"liquid_{name}": self.liquid[:, :, k] for k, name in enumerate(PHASE_NAMES)},
            "isentropic_h": self.isentropic[:, :, 0],
        }
        self.flat = {name: np.ascontiguousarray(v).ravel() for name, v in columns.items()}

    def arrays(self) -> dict[str, np.ndarray]:
        axes = {
            name: np.array([axis.start, axis.step, axis.nodes])
            for name, axis in self._axes().items()
        }
        tables = {k: getattr(self, k) for k in ("saturation", "vapour", "liquid", "isentropic")}
        return {**{f"axis_{k}": v for k, v in axes.items()}, **tables}

    def _axes(self) -> dict[str, _Axis]:
        return {
            "pressure": self.pressure_axis,
            "superheat": self.superheat_axis,
            "subcooling": self.subcooling_axis,
            "entropy": self.entropy_axis,
        }

    @classmethod
    def from_arrays(cls, refrigerant: Refrigerant, arrays) -> PropertyTables:
        def axis(name):
            start, step, nodes = arrays[f"axis_{name}"]
            return _Axis(float(start), float(step), int(nodes))

        return cls(
            refrigerant,
            axis("pressure"),
            arrays["saturation"],
            axis("superheat"),
            arrays["vapour"],
            axis("subcooling"),
            arrays["liquid"],
            axis("entropy"),
            arrays["isentropic"],
        )


def _pressure_range(fluid: Refrigerant) -> tuple[float, float]:
    """Lowest and highest tabulated saturation pressure [Pa] (dew line)."""
    state = coolprop().AbstractState("HEOS", fluid.coolprop_name)
    t_low = max(LOWEST_TEMPERATURE, state.Ttriple() + 1.0)
    t_high = min(HIGHEST_SATURATION, state.T_critical() - 3.0)
    p_low = exact.saturation_pressure(fluid, t_low, "bubble")
    p_high = exact.saturation_pressure(fluid, t_high, "dew")
    return max(p_low, exact.saturation_pressure(fluid, t_low, "dew")), p_high


def build_tables(name: str | Refrigerant) -> PropertyTables:
    """Compute a refrigerant's tables from CoolProp's full equation of state (a few seconds)."""
    fluid = get_refrigerant(name)
    CP = coolprop()
    p_low, p_high = _pressure_range(fluid)
    u_low, u_high = np.log(p_low), np.log(p_high)

    # The grid extends one cell past the tabulated range on each side, so that cubic stencils
    # near the edges of the operating envelope stay centred.
    p_axis_step = (u_high - u_low) / (PRESSURE_NODES - 3)
    p_axis = _Axis(u_low - p_axis_step, p_axis_step, PRESSURE_NODES)
    p_rows = np.exp(p_axis.values())
    t_dew = exact.saturation_temperature(fluid, p_rows, "dew")
    t_bubble = exact.saturation_temperature(fluid, p_rows, "bubble")
    s_dew = exact.saturated_entropy(fluid, p_rows, "dew")
    saturation = np.column_stack(
        [
            t_dew,
            t_bubble,
            exact.saturated_enthalpy(fluid, p_rows, "dew"),
            exact.saturated_enthalpy(fluid, p_rows, "bubble"),
            s_dew,
            exact.saturated_entropy(fluid, p_rows, "bubble"),
        ]
    )

    superheat_axis = _Axis(0.0, np.sqrt(SUPERHEAT_SPAN) / (SUPERHEAT_NODES - 1), SUPERHEAT_NODES)
    p_grid, x_grid = np.meshgrid(p_rows, superheat_axis.values() ** 2, indexing="ij")
    t_grid = t_dew[:, None] + x_grid
    vapour = exact._evaluate(
        fluid, CP.PT_INPUTS, p_grid, t_grid, ("hmass", "smass", "rhomass"), "gas"
    )
    vapour[:, :, 0] = [  # the first column is the saturated vapour itself
        exact.saturated_enthalpy(fluid, p_rows, "dew"),
        s_dew,
        exact._evaluate(fluid, CP.PQ_INPUTS, p_rows, 1.0, ("rhomass",))[0],
    ]
    vapour[2] = np.log(vapour[2])

    subcooling_axis = _Axis(
        0.0, np.sqrt(SUBCOOLING_SPAN) / (SUBCOOLING_NODES - 1), SUBCOOLING_NODES
    )
    p_grid, y_grid = np.meshgrid(p_rows, subcooling_axis.values() ** 2, indexing="ij")
    liquid = exact._evaluate(
        fluid,
        CP.PT_INPUTS,
        p_grid,
        t_bubble[:, None] - y_grid,
        ("hmass", "smass", "rhomass"),
        "liquid",
    )
    liquid[:, :, 0] = [
        exact.saturated_enthalpy(fluid, p_rows, "bubble"),
        exact.saturated_entropy(fluid, p_rows, "bubble"),
        exact._evaluate(fluid, CP.PQ_INPUTS, p_rows, 0.0, ("rhomass",))[0],
    ]
    liquid[2] = np.log(liquid[2])

    entropy_axis = _Axis(0.0, ENTROPY_SPAN / (ENTROPY_NODES - 1), ENTROPY_NODES)
    p_grid, z_grid = np.meshgrid(p_rows, entropy_axis.values(), indexing="ij")
    isentropic = exact._evaluate(
        fluid, CP.PSmass_INPUTS, p_grid, s_dew[:, None] + z_grid, ("hmass",), "gas"
    )
    isentropic[0, :, 0] = exact.saturated_enthalpy(fluid, p_rows, "dew")

    return PropertyTables(
        fluid,
        p_axis,
        saturation,
        superheat_axis,
        np.moveaxis(vapour, 0, -1),
        subcooling_axis,
        np.moveaxis(liquid, 0, -1),
        entropy_axis,
        np.moveaxis(isentropic, 0, -1),
    )


_tables: dict[str, PropertyTables] = {}
_lock = threading.Lock()


def _cache_file(fluid: Refrigerant) -> Path:
    safe = fluid.designation.replace("(", "_").replace(")", "")
    return cache_directory() / f"{safe}-coolprop{COOLPROP_VERSION}-layout{TABLE_LAYOUT}.npz"


def tables_for(name: str | Refrigerant) -> PropertyTables:
    """The refrigerant's tables: from memory, else from the disk cache, else built and cached."""
    fluid = get_refrigerant(name)
    found = _tables.get(fluid.designation)
    if found is not None:
        return found
    with _lock:
        if fluid.designation in _tables:
            return _tables[fluid.designation]
        path = _cache_file(fluid)
        tables = None
        arrays = load_arrays(path)
        if arrays is not None:
            try:
                tables = PropertyTables.from_arrays(fluid, arrays)
            except (ValueError, KeyError):
                tables = None  # stale cache file: rebuild below
        if tables is None:
            tables = build_tables(fluid)
            save_arrays(path, tables.arrays())
        _tables[fluid.designation] = tables
        return tables


def _inputs(*values) -> tuple[tuple[int, ...], list[np.ndarray]]:
    arrays = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in values))
    return arrays[0].shape, [a.ravel() for a in arrays]


def _shaped(values: np.ndarray, shape):
    return float(values[0]) if shape == () else values.reshape(shape)


_EXACT_SATURATION = {
    "T": exact.saturation_temperature,
    "h": exact.saturated_enthalpy,
    "s": exact.saturated_entropy,
}
_EXACT_SINGLE_PHASE = {"h": exact.enthalpy, "s": exact.entropy, "rho": exact.density}


class PressureLookup:
    """Properties at an array of pressures [Pa], locating the pressures on the grids only once.

    Every lookup at the same pressures (saturation temperatures, vapour and liquid states, the
    isentropic end state) shares that work, which is where the fast path spends most of its time.
    """

    def __init__(self, refrigerant, pressure):
        self.tables = tables_for(refrigerant)
        self.p = np.asarray(pressure, dtype=float).ravel()
        with np.errstate(invalid="ignore", divide="ignore"):
            self.u = np.log(np.where(self.p > 0, self.p, np.nan))
        axis = self.tables.pressure_axis
        self.tabulated = (self.u >= axis.start + axis.step) & (self.u <= axis.stop - axis.step)
        self._rows = axis.locate(self.u)
        self._stencil = _Stencil(self._rows)
        self._saturation: dict[str, np.ndarray] = {}

    def _row_location(self, mask: np.ndarray, every: bool):
        """The pressures' location on the grid, for the samples in ``mask`` (``every``: all)."""
        if every:
            return self._rows
        index, weights = self._rows
        return index[mask], weights[:, mask]

    def saturation(self, name: str) -> np.ndarray:
        """A saturation property by name: ``T_dew``, ``T_bubble``, ``h_dew``, ``h_bubble``,
        ``s_dew`` or ``s_bubble`` [K, J/kg, J/(kg K)]; NaN above the critical pressure."""
        values = self._saturation.get(name)
        if values is None:
            values = self._stencil.apply(self.tables.flat[name])
            redo = ~self.tabulated
            values[redo] = np.nan
            redo &= np.isfinite(self.p)
            if redo.any():
                quantity, phase = name.split("_")
                fallback = _EXACT_SATURATION[quantity]
                values[redo] = fallback(self.tables.refrigerant, self.p[redo], phase)
            self._saturation[name] = values
        return values

    def _phase_values(self, phase, distance, mask, every, names) -> dict[str, np.ndarray]:
        axis = self.tables.superheat_axis if phase == "vapour" else self.tables.subcooling_axis
        at = distance if every else distance[mask]
        stencil = _Stencil(self._row_location(mask, every), None, axis, at)
        return {name: stencil.apply(self.tables.flat[f"{phase}_{name}"]) for name in names}

    def single_phase(self, temperature, *names: str) -> dict[str, np.ndarray]:
        """Vapour or liquid properties at (P, ``temperature`` [K]): ``h`` [J/kg], ``s``
        [J/(kg K)], ``rho`` [kg/m^3]. NaN inside a blend's glide (between bubble and dew point)."""
        t = np.broadcast_to(np.asarray(temperature, dtype=float), self.p.shape)
        with np.errstate(invalid="ignore"):
            superheat = t - self.saturation("T_dew")
            subcooling = self.saturation("T_bubble") - t
            root_superheat = np.sqrt(superheat)
            root_subcooling = np.sqrt(subcooling)
        vapour = self.tabulated & self.tables.superheat_axis.contains(root_superheat)
        columns = ["ln_rho" if name == "rho" else name for name in names]
        if vapour.all():  # the usual case: one table serves every sample
            out = self._phase_values("vapour", root_superheat, vapour, True, columns)
        else:
            out = {name: np.full(self.p.shape, np.nan) for name in columns}
            liquid = self.tabulated & self.tables.subcooling_axis.contains(root_subcooling)
            liquid &= ~vapour
            for phase, mask, distance in (
                ("vapour", vapour, root_superheat),
                ("liquid", liquid, root_subcooling),
            ):
                every = mask.all()
                if every:
                    out.update(self._phase_values(phase, distance, mask, True, columns))
                elif mask.any():
                    values = self._phase_values(phase, distance, mask, False, columns)
                    for name in columns:
                        out[name][mask] = values[name]
        if "ln_rho" in out:
            out["rho"] = np.exp(out.pop("ln_rho"))
        computable = np.isfinite(self.p) & np.isfinite(t)
        computable &= ~((superheat < 0) & (subcooling < 0))  # not inside the glide
        for name in names:
            values = out[name]
            redo = np.isnan(values) & computable
            if redo.any():
                values[redo] = _EXACT_SINGLE_PHASE[name](
                    self.tables.refrigerant, self.p[redo], t[redo]
                )
        return out

    def isentropic_enthalpy(self, entropy_) -> np.ndarray:
        """Enthalpy [J/kg] at (P, ``entropy_`` [J/(kg K)]); see :func:`isentropic_enthalpy`."""
        s = np.broadcast_to(np.asarray(entropy_, dtype=float), self.p.shape)
        excess = s - self.saturation("s_dew")
        superheated = self.tabulated & self.tables.entropy_axis.contains(excess)
        out = np.full(self.p.shape, np.nan)
        every = superheated.all()
        if every or superheated.any():
            stencil = _Stencil(
                self._row_location(superheated, every),
                None,
                self.tables.entropy_axis,
                excess if every else excess[superheated],
            )
            out[superheated] = stencil.apply(self.tables.flat["isentropic_h"])
        wet = excess < 0
        if wet.any():
            h_dew, h_bubble = self.saturation("h_dew")[wet], self.saturation("h_bubble")[wet]
            s_dew, s_bubble = self.saturation("s_dew")[wet], self.saturation("s_bubble")[wet]
            lever = (s[wet] - s_bubble) / (s_dew - s_bubble)
            out[wet] = np.where(lever >= 0, h_bubble + lever * (h_dew - h_bubble), np.nan)
        redo = np.isnan(out) & np.isfinite(self.p) & np.isfinite(s) & ~(wet & self.tabulated)
        if redo.any():
            out[redo] = exact.isentropic_state(self.tables.refrigerant, self.p[redo], s[redo])[1]
        return out


def _saturation(quantity: str, refrigerant, pressure, phase: Phase):
    exact._quality(phase)  # validates the phase name
    shape, (p,) = _inputs(pressure)
    return _shaped(PressureLookup(refrigerant, p).saturation(f"{quantity}_{phase}"), shape)


def saturation_temperature(refrigerant, pressure, phase: Phase = "dew"):
    """Saturation temperature [K] at ``pressure`` [Pa], dew or bubble point."""
    return _saturation("T", refrigerant, pressure, phase)


def saturated_enthalpy(refrigerant, pressure, phase: Phase = "dew"):
    """Saturated vapour or liquid enthalpy [J/kg] at ``pressure`` [Pa]."""
    return _saturation("h", refrigerant, pressure, phase)


def saturated_entropy(refrigerant, pressure, phase: Phase = "dew"):
    """Saturated vapour or liquid entropy [J/(kg K)] at ``pressure`` [Pa]."""
    return _saturation("s", refrigerant, pressure, phase)


def _single_phase(refrigerant, pressure, temperature, name: str):
    shape, (p, t) = _inputs(pressure, temperature)
    return _shaped(PressureLookup(refrigerant, p).single_phase(t, name)[name], shape)


def enthalpy(refrigerant, pressure, temperature):
    """Specific enthalpy [J/kg] at (P [Pa], T [K]), single phase (NaN inside a glide)."""
    return _single_phase(refrigerant, pressure, temperature, "h")


def entropy(refrigerant, pressure, temperature):
    """Specific entropy [J/(kg K)] at (P [Pa], T [K]), single phase."""
    return _single_phase(refrigerant, pressure, temperature, "s")


def density(refrigerant, pressure, temperature):
    """Density [kg/m^3] at (P [Pa], T [K]), single phase."""
    return _single_phase(refrigerant, pressure, temperature, "rho")


def isentropic_enthalpy(refrigerant, pressure, entropy_):
    """Enthalpy [J/kg] at (P [Pa], s [J/(kg K)]): the isentropic compression end state h2s.

    Superheated end states come from the isentropic table; end states inside the dome (wet
    compression of a dry fluid such as R600a) from the lever rule between the saturated states,
    h = h_bubble + (s - s_bubble) / (s_dew - s_bubble) * (h_dew - h_bubble).
    """
    shape, (p, s) = _inputs(pressure, entropy_)
    return _shaped(PressureLookup(refrigerant, p).isentropic_enthalpy(s), shape)
