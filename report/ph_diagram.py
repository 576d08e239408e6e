"""Pressure-enthalpy (p-h) diagrams of refrigeration cycles, drawn with matplotlib's OO API.

The diagram has a logarithmic pressure axis, the saturation dome (bubble and dew lines up to just
below the critical point), a few isotherms, and each cycle's states joined in cycle order:
1 -> 2 compression (the ideal 1 -> 2s dashed), 2 -> 3 heat rejection, 3 -> 4 expansion at constant
enthalpy, 4 -> 1 evaporation. Axes in kJ/kg and bar (absolute) for SI, Btu/lb and psia for
inch-pound. No pyplot: figures are independent objects, safe in a server.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

from rimewatch.physics import refrigerant as props

# Display conversions (NIST SP 811, Appendix B): 1 Btu_IT/lb = 2326 J/kg exactly;
# 1 psi = 6894.757 Pa; 1 bar = 1e5 Pa; degF = K * 1.8 - 459.67.
_AXES = {
    "SI": {
        "h": 1e3,
        "h_label": "specific enthalpy h [kJ/kg]",
        "p": 1e5,
        "p_label": "pressure [bar abs]",
    },
    "IP": {
        "h": 2326.0,
        "h_label": "specific enthalpy h [Btu/lb]",
        "p": 6894.757293168361,
        "p_label": "pressure [psia]",
    },
}

CYCLE_COLOURS = ("#c0392b", "#1f5f99", "#2e8b57", "#8e44ad", "#d35400", "#2c3e50")
DOME_COLOUR = "#222222"
ISOTHERM_COLOUR = "#9a9a9a"


def _temperature_text(kelvin: float, unit_system: str) -> str:
    if unit_system == "IP":
        return f"{kelvin * 1.8 - 459.67:.0f} °F"
    return f"{kelvin - 273.15:.0f} °C"


def _per_row(values, rows: int) -> np.ndarray:
    return np.broadcast_to(np.asarray(values, dtype=float), (rows,))


def _saturation_lines(fluid, p_low: float, p_high: float, points: int = 160):
    """Bubble and dew lines as (pressure [Pa], h_bubble, h_dew [J/kg]) up to just below p_crit."""
    p_crit = fluid.critical_pressure
    top = min(p_high, 0.9999 * p_crit)
    # denser near the critical point, where the lines bend sharply
    fractions = 1.0 - np.geomspace(1.0, 1e-4, points)
    pressures = np.exp(np.log(p_low) + (np.log(top) - np.log(p_low)) * fractions / fractions[-1])
    h_bubble = np.asarray(props.saturated_enthalpy(fluid, pressures, "bubble"), dtype=float)
    h_dew = np.asarray(props.saturated_enthalpy(fluid, pressures, "dew"), dtype=float)
    keep = np.isfinite(h_bubble) & np.isfinite(h_dew)
    return pressures[keep], h_bubble[keep], h_dew[keep]


def _isotherm(fluid, temperature: float, p_low: float, p_high: float):
    """(h [J/kg], p [Pa]) along one isotherm: liquid, across the dome, vapour (or supercritical)."""
    pressures = np.geomspace(p_low, p_high, 120)
    h = np.asarray(props.enthalpy(fluid, pressures, np.full_like(pressures, temperature)), float)
    if temperature < fluid.critical_temperature - 0.5:
        p_bubble = props.saturation_pressure(fluid, temperature, "bubble")
        p_dew = props.saturation_pressure(fluid, temperature, "dew")
        edges_p = np.array([p_bubble, p_dew])
        edges_h = np.array(
            [
                props.saturated_enthalpy(fluid, p_bubble, "bubble"),
                props.saturated_enthalpy(fluid, p_dew, "dew"),
            ]
        )
        pressures = np.concatenate([pressures, edges_p])
        h = np.concatenate([h, edges_h])
    keep = np.isfinite(h)
    # from high to low pressure: liquid, bubble point, dew point, vapour (ties: lower h first)
    order = np.lexsort((h[keep], -pressures[keep]))
    return h[keep][order], pressures[keep][order]


def _cycle_path(row: pd.Series, p_suction: float, p_discharge: float, p_liquid: float):
    """Polylines (h [J/kg], p [Pa]) of one cycle: solid loop and the dashed ideal compression."""
    h2 = row["h2"] if np.isfinite(row["h2"]) else row["h2s"]
    loop_h = [row["h1"], h2, row["h3"], row["h3"], row["h4"], row["h1"]]
    loop_p = [p_suction, p_discharge, p_discharge, p_liquid, p_suction, p_suction]
    ideal = ([row["h1"], row["h2s"]], [p_suction, p_discharge])
    return (np.array(loop_h, float), np.array(loop_p, float)), ideal


def _title(fluid, states: pd.DataFrame, unit_system: str) -> str:
    if len(states) != 1:
        return f"{fluid.designation}: {len(states)} cycles on the p-h diagram"
    row = states.iloc[0]
    parts = [fluid.designation]
    if np.isfinite(row.get("t_evap", np.nan)):
        parts.append(f"evaporating {_temperature_text(row['t_evap'], unit_system)}")
    if np.isfinite(row.get("t_cond", np.nan)):
        parts.append(f"condensing {_temperature_text(row['t_cond'], unit_system)}")
    elif "transcritical" in str(row.get("flags", "")):
        parts.append("transcritical")
    if np.isfinite(row.get("cop", np.nan)):
        parts.append(f"COP {row['cop']:.2f}")
    return ", ".join(parts)


def ph_diagram(
    refrigerant,
    states: pd.DataFrame,
    suction_pressure,
    discharge_pressure,
    liquid_pressure=None,
    *,
    labels=None,
    unit_system: str = "SI",
    isotherms: bool = True,
    title: str | None = None,
) -> Figure:
    """Draw one or several cycles on the refrigerant's pressure-enthalpy diagram.

    Parameters
    ----------
    refrigerant : str or Refrigerant
        Designation, e.g. ``"R410A"``.
    states : DataFrame
        Rows of :func:`rimewatch.physics.cycle_states` (columns h1, h2, h2s, h3, h4 [J/kg],
        optionally t_evap, t_cond [K], cop, flags); one cycle per row.
    suction_pressure, discharge_pressure : float or array-like
        Absolute pressures [Pa] of each row (scalars apply to every row).
    liquid_pressure : float or array-like, optional
        Liquid-line pressure [Pa] at state 3; the discharge pressure when omitted.
    labels : sequence of str, optional
        Legend text per row; the row index when omitted (no legend for a single cycle).
    unit_system : ``"SI"`` (kJ/kg, bar abs) or ``"IP"`` (Btu/lb, psia).
    isotherms : draw a few labelled isotherms.
    title : figure title; by default the refrigerant and, for one cycle, its key figures.

    Returns
    -------
    matplotlib.figure.Figure, with an Agg canvas; save it with :func:`save_figure`.
    """
    if unit_system not in _AXES:
        raise ValueError(f"unit_system must be 'SI' or 'IP', not {unit_system!r}")
    fluid = props.get_refrigerant(refrigerant)
    scale = _AXES[unit_system]
    rows = len(states)
    if rows == 0:
        raise ValueError("no cycles to draw")
    p_suc = _per_row(suction_pressure, rows)
    p_dis = _per_row(discharge_pressure, rows)
    p_liq = p_dis if liquid_pressure is None else _per_row(liquid_pressure, rows)

    fig = Figure(figsize=(8.0, 5.6), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    ax.set_yscale("log")

    p_crit = fluid.critical_pressure
    finite_p = np.concatenate([p_suc, p_dis, p_liq])
    finite_p = finite_p[np.isfinite(finite_p) & (finite_p > 0)]
    p_low = 0.5 * finite_p.min() if finite_p.size else 0.5e5
    p_high = max(1.15 * p_crit, 1.4 * finite_p.max()) if finite_p.size else 1.15 * p_crit

    dome_p, h_bubble, h_dew = _saturation_lines(fluid, p_low, p_high)
    ax.plot(
        h_bubble / scale["h"], dome_p / scale["p"], color=DOME_COLOUR, lw=1.6, label="bubble line"
    )
    ax.plot(h_dew / scale["h"], dome_p / scale["p"], color=DOME_COLOUR, lw=1.6, label="dew line")
    if dome_p.size:
        ax.plot(
            [h_bubble[-1] / scale["h"], h_dew[-1] / scale["h"]],
            [dome_p[-1] / scale["p"]] * 2,
            color=DOME_COLOUR,
            lw=1.6,
            label="_dome top",
        )

    cycle_h = []
    for k, (index, row) in enumerate(states.iterrows()):
        colour = CYCLE_COLOURS[k % len(CYCLE_COLOURS)]
        (loop_h, loop_p), (ideal_h, ideal_p) = _cycle_path(row, p_suc[k], p_dis[k], p_liq[k])
        name = str(labels[k]) if labels is not None else str(index)
        ax.plot(
            loop_h / scale["h"], loop_p / scale["p"], color=colour, lw=2.0, zorder=3, label=name
        )
        ax.plot(
            np.array(ideal_h) / scale["h"],
            np.array(ideal_p) / scale["p"],
            color=colour,
            lw=1.2,
            ls="--",
            label=f"_{name} isentropic",
        )
        points = {
            "1": (row["h1"], p_suc[k]),
            "2": (row["h2"], p_dis[k]),
            "2s": (row["h2s"], p_dis[k]),
            "3": (row["h3"], p_liq[k]),
            "4": (row["h4"], p_suc[k]),
        }
        for state, (h, p) in points.items():
            if not (np.isfinite(h) and np.isfinite(p)):
                continue
            ax.plot(h / scale["h"], p / scale["p"], "o", color=colour, ms=4.5, label="_state")
            if k == 0:
                offset = {"2s": (-14, 6), "3": (-12, 6), "4": (-10, -14)}.get(state, (5, 5))
                ax.annotate(
                    state,
                    (h / scale["h"], p / scale["p"]),
                    xytext=offset,
                    textcoords="offset points",
                    fontsize=9,
                    color=colour,
                )
        cycle_h.extend(v for v in (loop_h.tolist() + list(ideal_h)) if np.isfinite(v))

    h_all = np.concatenate([h_bubble, h_dew, np.array(cycle_h, float)])
    h_span = h_all.max() - h_all.min()
    ax.set_xlim(
        (h_all.min() - 0.05 * h_span) / scale["h"], (h_all.max() + 0.12 * h_span) / scale["h"]
    )
    ax.set_ylim(p_low / scale["p"], p_high / scale["p"])

    if isotherms:
        _draw_isotherms(ax, fluid, p_low, p_high, scale, unit_system)

    ax.yaxis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 3.0, 5.0)))
    ax.yaxis.set_major_formatter(FuncFormatter(lambda value, _: f"{value:g}"))
    ax.yaxis.set_minor_locator(LogLocator(base=10.0, subs=np.arange(1.0, 10.0)))
    ax.yaxis.set_minor_formatter(NullFormatter())
    ax.set_xlabel(scale["h_label"])
    ax.set_ylabel(scale["p_label"])
    ax.grid(True, which="both", color="#e4e4e4", lw=0.6)
    ax.set_axisbelow(True)
    ax.set_title(title if title is not None else _title(fluid, states, unit_system), fontsize=11)
    if rows > 1 or labels is not None:
        ax.legend(loc="upper left", fontsize=8, frameon=False)
    return fig


def _draw_isotherms(ax, fluid, p_low, p_high, scale, unit_system):
    """Four or five isotherms spread over the pressure range, labelled at their right end."""
    t_low = props.saturation_temperature(fluid, p_low, "dew")
    t_top = props.saturation_temperature(fluid, min(p_high, 0.99 * fluid.critical_pressure), "dew")
    if not (np.isfinite(t_low) and np.isfinite(t_top)):
        return
    # round values of the display unit: every 20 degC or every 40 degF
    if unit_system == "SI":
        first = np.ceil((t_low - 273.15) / 20.0) * 20.0 + 273.15
        temperatures = np.arange(first, t_top + 30.0, 20.0)
    else:
        first_f = np.ceil((t_low * 1.8 - 459.67) / 40.0) * 40.0
        temperatures = (np.arange(first_f, t_top * 1.8 - 459.67 + 50.0, 40.0) + 459.67) / 1.8
    (x_min, x_max), y_max = ax.get_xlim(), ax.get_ylim()[1]
    for temperature in temperatures[:6]:
        h, p = _isotherm(fluid, temperature, p_low, p_high)
        if h.size < 2:
            continue
        x, y = h / scale["h"], p / scale["p"]
        gid = f"isotherm {float(temperature)!r} K"
        ax.plot(x, y, color=ISOTHERM_COLOUR, lw=0.7, zorder=1, label="_isotherm", gid=gid)
        inside = np.flatnonzero((x > x_min) & (x < x_max) & (y <= y_max))
        if inside.size:
            top = inside[np.argmax(y[inside])]  # label where the isotherm leaves the top
            ax.annotate(
                _temperature_text(temperature, unit_system),
                (x[top], y[top]),
                xytext=(3, -10),
                textcoords="offset points",
                fontsize=7,
                color="#707070",
            )


def save_figure(fig: Figure, path) -> Path:
    """Save a figure as PNG or SVG, chosen by the file suffix; returns the path.

    Raises
    ------
    ValueError
        For any other suffix.
    """
    path = Path(path)
    fmt = path.suffix.lower().lstrip(".")
    if fmt not in ("png", "svg"):
        raise ValueError(f"plot file must end in .png or .svg, not {path.name!r}")
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, format=fmt, dpi=120 if fmt == "png" else None)
    return path
