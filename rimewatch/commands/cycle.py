"""``rimewatch cycle``: a technician's quick check of one circuit from gauge and probe readings."""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import click
import numpy as np

from rimewatch.commands.virtual_options import virtual_sensor_options, virtual_sensors_block
from rimewatch.ingest.units import (
    UnitError,
    atmospheric_pressure,
    from_si,
    parse_quantity,
    temperature_difference_unit,
    to_si,
)
from rimewatch.physics import refrigerant as props

STATE_NAMES = {
    "1": "suction",
    "2": "discharge",
    "2s": "ideal discharge",
    "3": "liquid line",
    "4": "evaporator inlet",
}

# key -> (label, kind, how it is computed); kinds: temperature, difference, enthalpy, ratio
DERIVED = (
    ("t_evap", "evaporating temperature (dew)", "temperature", "T_dew(p1)"),
    ("t_cond", "condensing temperature (dew)", "temperature", "T_dew(p2)"),
    ("t_cond_bubble", "condensing bubble point", "temperature", "T_bubble(p3)"),
    ("superheat", "suction superheat", "difference", "T1 - T_evap"),
    ("subcooling", "liquid subcooling", "difference", "T_bubble(p3) - T3"),
    ("discharge_superheat", "discharge superheat", "difference", "T2 - T_cond"),
    ("refrigerating_effect", "refrigerating effect", "enthalpy", "h1 - h4"),
    ("compression_work", "compression work (actual)", "enthalpy", "h2 - h1"),
    ("isentropic_work", "compression work (isentropic)", "enthalpy", "h2s - h1"),
    ("heat_rejection_effect", "heat rejection", "enthalpy", "h2 - h3"),
    ("cop", "COP (cooling)", "ratio", "(h1 - h4) / (h2 - h1)"),
    ("cop_carnot", "Carnot COP", "ratio", "T_evap / (T_cond - T_evap)"),
    ("second_law_efficiency", "second-law efficiency", "ratio", "COP / Carnot COP"),
    ("eta_isentropic", "isentropic efficiency", "ratio", "(h2s - h1) / (h2 - h1)"),
    ("pressure_ratio", "pressure ratio", "ratio", "p2 / p1 (absolute)"),
    ("quality_evaporator_inlet", "evaporator inlet quality", "ratio", "x(p1, h4)"),
)

# [K] -100 to 200 degC: wider than any refrigerant line runs (common practice: discharge lines
# stay below ~150 degC to protect the oil)
PLAUSIBLE_LINE_TEMPERATURE = (173.15, 473.15)

SI_UNIT_OF_KIND = {
    "pressure": "Pa",
    "temperature": "K",
    "difference": "K",
    "enthalpy": "J/kg",
    "entropy": "J/(kg K)",
    "ratio": "1",
}

LABELS = {"degF": "°F", "degC": "°C", "delta_degF": "°F", "Btu/(lb R)": "Btu/(lb·°R)"}


@dataclass(frozen=True)
class DisplayUnits:
    """The units the user's readings came in, used again for the answer."""

    suction_pressure: str
    discharge_pressure: str
    liquid_pressure: str
    temperature: str
    unit_system: str  # "SI" or "IP"

    @property
    def difference(self) -> str:
        return temperature_difference_unit(self.temperature)

    @property
    def enthalpy(self) -> str:
        return "Btu/lb" if self.unit_system == "IP" else "kJ/kg"

    @property
    def entropy(self) -> str:
        return "Btu/(lb R)" if self.unit_system == "IP" else "kJ/(kg K)"

    def for_kind(self, kind: str) -> str | None:
        return {
            "temperature": self.temperature,
            "difference": self.difference,
            "enthalpy": self.enthalpy,
            "entropy": self.entropy,
        }.get(kind)


def cautions(fluid: props.Refrigerant) -> list[str]:
    """The trade's usual cautions for working on a circuit with this refrigerant."""
    lines = [
        "Refrigerant circuits are under pressure: use rated gauges and hoses, eye and hand "
        "protection; only certified technicians may open or charge a circuit, under local codes.",
    ]
    if fluid.toxic:
        lines.append(
            f"{fluid.designation} is class {fluid.safety_class}: toxic (and mildly flammable); "
            "follow the site's ammonia procedures, detection and breathing protection."
        )
    elif fluid.safety_class == "A3":
        lines.append(
            f"{fluid.designation} is class A3, highly flammable: no ignition sources, ventilate, "
            "use leak detection and tools and recovery equipment rated for A3 refrigerants."
        )
    elif fluid.safety_class == "A2L":
        lines.append(
            f"{fluid.designation} is class A2L, mildly flammable: keep ignition sources away, "
            "ventilate, use tools and recovery equipment rated for A2L refrigerants."
        )
    if fluid.designation == "R744":
        lines.append(
            "R744 runs at very high pressures (well above 70 bar in a gas cooler, and at "
            "standstill in a warm plant room): check every gauge, hose and relief device is "
            "rated for it."
        )
    lines.append("These figures are computed from the readings given; confirm on site.")
    return lines


def _reading(option: str, text: str | None, kind: str, atmosphere: float) -> tuple[float, str]:
    """(SI value, canonical unit) of one option, or (NaN, "") when not given."""
    if text is None:
        return math.nan, ""
    try:
        value, unit = parse_quantity(text, kind=kind)
    except UnitError as error:
        raise click.ClickException(f"{option}: {error}") from None
    if not math.isfinite(value):
        raise click.ClickException(f"{option}: {text!r} is not a finite number")
    si = to_si(value, unit, atmospheric_pressure=atmosphere)
    if kind == "pressure" and si <= 0:
        raise click.ClickException(f"{option}: {text!r} is below absolute zero pressure")
    if kind == "temperature" and si <= 0:
        raise click.ClickException(f"{option}: {text!r} is below absolute zero")
    return si, unit


def _display_units(units: dict[str, str]) -> DisplayUnits:
    ip = any(u in ("psig", "psia", "degF") for u in units.values())
    temperature = next(
        (units[k] for k in ("suction_temp", "liquid_temp", "discharge_temp") if units[k]),
        "degF" if ip else "degC",
    )
    discharge = units["discharge_pressure"]
    return DisplayUnits(
        suction_pressure=units["suction_pressure"],
        discharge_pressure=discharge,
        liquid_pressure=units["liquid_pressure"] or discharge,
        temperature=temperature,
        unit_system="IP" if ip else "SI",
    )


def analyse(refrigerant, readings: dict[str, float]) -> dict:
    """One sample's cycle in SI: state points, derived quantities, flags and notes.

    ``readings`` holds suction_pressure, discharge_pressure, liquid_pressure [Pa absolute] and
    suction_temp, liquid_temp, discharge_temp [K]; NaN where not measured.
    """
    from rimewatch.physics.cycle import cycle_states

    fluid = props.get_refrigerant(refrigerant)
    given = {k: v for k, v in readings.items() if not math.isnan(v)}
    frame = cycle_states(
        fluid,
        given["suction_pressure"],
        given["discharge_pressure"],
        suction_temp=given.get("suction_temp"),
        liquid_temp=given.get("liquid_temp"),
        discharge_temp=given.get("discharge_temp"),
        liquid_pressure=given.get("liquid_pressure"),
        method="exact",
    )
    row = frame.iloc[0]
    p1 = readings["suction_pressure"]
    p2 = readings["discharge_pressure"]
    p3 = p2 if math.isnan(readings["liquid_pressure"]) else readings["liquid_pressure"]
    t2s, _ = props.isentropic_state(fluid, p2, row["s1"])
    x4 = row["quality_evaporator_inlet"]
    # state 4 lies in the dome: temperature and entropy by the lever rule at p1 (exact for a
    # pure fluid; for a blend the temperature is interpolated across the glide)
    t_bubble1 = props.saturation_temperature(fluid, p1, "bubble")
    s_bubble1 = props.saturated_entropy(fluid, p1, "bubble")
    s_dew1 = props.saturated_entropy(fluid, p1, "dew")
    inside = 0.0 <= x4 <= 1.0
    states = {
        "1": (p1, readings["suction_temp"], row["h1"], row["s1"]),
        "2": (
            p2,
            readings["discharge_temp"],
            row["h2"],
            props.entropy(fluid, p2, readings["discharge_temp"]),
        ),
        "2s": (p2, t2s, row["h2s"], row["s1"]),
        "3": (
            p3,
            readings["liquid_temp"],
            row["h3"],
            props.entropy(fluid, p3, readings["liquid_temp"]),
        ),
        "4": (
            p1,
            t_bubble1 + x4 * (row["t_evap"] - t_bubble1) if inside else math.nan,
            row["h4"],
            s_bubble1 + x4 * (s_dew1 - s_bubble1) if inside else math.nan,
        ),
    }
    derived = {key: float(row[key]) for key, *_ in DERIVED if key in row.index}
    derived["isentropic_work"] = float(row["h2s"] - row["h1"])
    notes = []
    if math.isnan(readings["discharge_temp"]):
        notes.append(
            "no discharge temperature: actual compression work, COP, isentropic efficiency and "
            "state 2 are not available; the isentropic state 2s is shown"
        )
    if math.isnan(readings["liquid_temp"]):
        notes.append(
            "no liquid temperature: subcooling, states 3 and 4 and the COP are not available"
        )
    if math.isnan(readings["suction_temp"]):
        notes.append("no suction temperature: superheat and states 1, 2s are not available")
    low, high = PLAUSIBLE_LINE_TEMPERATURE
    for reading in ("suction_temp", "liquid_temp", "discharge_temp"):
        if readings[reading] < low or readings[reading] > high:  # False for NaN
            notes.append(
                f"{reading.replace('_', ' ')} is outside -100..200 degC, beyond what a "
                "refrigerant line reaches: check the reading"
            )
    inputs_of_state = {
        "1": "suction_temp",
        "2": "discharge_temp",
        "2s": "suction_temp",
        "3": "liquid_temp",
    }
    for name, reading in inputs_of_state.items():
        if not math.isnan(readings[reading]) and math.isnan(states[name][2]):
            notes.append(
                f"state {name} ({STATE_NAMES[name]}) could not be computed: the reading may be "
                "outside the refrigerant's property range or at odds with the others"
            )
    return {
        "refrigerant": fluid,
        "states": {
            name: dict(
                zip(("pressure", "temperature", "enthalpy", "entropy"), map(float, v), strict=True)
            )
            for name, v in states.items()
        },
        "derived": derived,
        "flags": [f for f in str(row["flags"]).split("; ") if f],
        "notes": notes,
    }


def _number(value: float, unit: str) -> str:
    if value is None or not math.isfinite(value):
        return "–"
    digits = {"kJ/(kg K)": 4, "Btu/(lb R)": 4, "1": 2, "MPa": 3, "MPa(g)": 3, "bar": 2, "bar(g)": 2}
    return f"{value:.{digits.get(unit, 1)}f}"


def _show(value_si: float, unit: str, atmosphere: float) -> str:
    if unit in ("1", None):
        return _number(value_si, "1")
    return _number(from_si(value_si, unit, atmospheric_pressure=atmosphere), unit)


def render_table(result: dict, units: DisplayUnits, atmosphere: float, console) -> None:
    """Print the state points, derived quantities, warnings and cautions as Rich tables."""
    from rich import box
    from rich.markup import escape
    from rich.table import Table

    fluid = result["refrigerant"]
    label = lambda u: LABELS.get(u, u)  # noqa: E731
    states = Table(
        title=f"{fluid.designation} cycle (ASHRAE 34 safety class {fluid.safety_class})",
        box=box.SIMPLE_HEAD,
        title_justify="left",
    )
    states.add_column("state")
    states.add_column("p", justify="right")
    states.add_column(escape(f"T [{label(units.temperature)}]"), justify="right")
    states.add_column(escape(f"h [{label(units.enthalpy)}]"), justify="right")
    states.add_column(escape(f"s [{label(units.entropy)}]"), justify="right")
    pressure_unit = {
        "1": units.suction_pressure,
        "2": units.discharge_pressure,
        "2s": units.discharge_pressure,
        "3": units.liquid_pressure,
        "4": units.suction_pressure,
    }
    transcritical = any(flag.startswith("transcritical") for flag in result["flags"])
    for name, state in result["states"].items():
        p_unit = pressure_unit[name]
        description = "gas cooler outlet" if name == "3" and transcritical else STATE_NAMES[name]
        states.add_row(
            f"{name} {description}",
            f"{_show(state['pressure'], p_unit, atmosphere)} {escape(p_unit)}",
            _show(state["temperature"], units.temperature, atmosphere),
            _show(state["enthalpy"], units.enthalpy, atmosphere),
            _show(state["entropy"], units.entropy, atmosphere),
        )
    console.print(states)

    derived = Table(box=box.SIMPLE_HEAD, title="derived", title_justify="left")
    derived.add_column("quantity")
    derived.add_column("value", justify="right")
    derived.add_column("unit")
    derived.add_column("from")
    for key, text, kind, how in DERIVED:
        unit = units.for_kind(kind) or "1"
        derived.add_row(
            text,
            _show(result["derived"].get(key, math.nan), unit, atmosphere),
            "-" if unit == "1" else escape(label(unit)),
            escape(how),
        )
    console.print(derived)
    for flag in result["flags"]:
        console.print(f"[yellow]warning:[/] {escape(flag)}", highlight=False)
    for note in result["notes"]:
        console.print(f"note: {escape(note)}", highlight=False)
    console.print(
        "note: enthalpy and entropy use the IIR reference state (h = 200 kJ/kg, s = 1 kJ/(kg K) "
        "for saturated liquid at 0 °C); compare differences, not values, with other charts.",
        highlight=False,
    )
    for line in cautions(fluid):
        console.print(f"[bold]caution:[/] {escape(line)}", highlight=False)


def _si_or_none(value: float) -> float | None:
    return float(value) if value is not None and math.isfinite(value) else None


def render_json(result: dict, given: dict[str, str], atmosphere: float) -> str:
    """The same answer as JSON: SI values with their units named."""
    fluid = result["refrigerant"]
    state_units = {"pressure": "Pa", "temperature": "K", "enthalpy": "J/kg", "entropy": "J/(kg K)"}
    document = {
        "refrigerant": fluid.designation,
        "safety_class": fluid.safety_class,
        "atmospheric_pressure": {"value": atmosphere, "unit": "Pa"},
        "readings": given,
        "states": {
            name: {
                quantity: {"value": _si_or_none(value), "unit": state_units[quantity]}
                for quantity, value in state.items()
            }
            for name, state in result["states"].items()
        },
        "derived": {
            key: {
                "value": _si_or_none(result["derived"].get(key, math.nan)),
                "unit": SI_UNIT_OF_KIND[kind],
                "description": text,
            }
            for key, text, kind, _ in DERIVED
        },
        "flags": result["flags"],
        "notes": result["notes"],
        "cautions": cautions(fluid),
    }
    return json.dumps(document, indent=2, ensure_ascii=False)


@click.command()
@click.option("--refrigerant", "-r", required=True, help="ASHRAE designation, e.g. R410A, R744.")
@click.option("--suction-pressure", required=True, help="e.g. '118 psig', '8.2 bar(g)'.")
@click.option("--discharge-pressure", required=True, help="e.g. '340 psig', '2.4 MPa'.")
@click.option("--suction-temp", help="Suction line temperature, e.g. '50 degF'.")
@click.option("--liquid-temp", help="Liquid line temperature before the expansion device.")
@click.option("--discharge-temp", help="Compressor discharge line temperature.")
@click.option("--liquid-pressure", help="Liquid line pressure, if measured apart from discharge.")
@click.option(
    "--elevation",
    help="Site elevation for gauge readings, metres or e.g. '4000 ft' [default: sea level].",
)
@click.option(
    "--format",
    "output_format",
    type=click.Choice(["table", "json"]),
    default="table",
    show_default=True,
)
@click.option("--plot", type=click.Path(dir_okay=False), help="Write the p-h diagram (.png/.svg).")
@virtual_sensor_options
def cycle(
    refrigerant,
    suction_pressure,
    discharge_pressure,
    suction_temp,
    liquid_temp,
    discharge_temp,
    liquid_pressure,
    elevation,
    output_format,
    plot,
    **virtual_options,
):
    """Rebuild one refrigerant cycle from gauge and probe readings.

    Give each reading with its unit inside the value: pressures in psig, psia, kPa, kPa(g), bar,
    bar(g), MPa or MPa(g); temperatures in degF, degC or K. Gauge pressures use the standard
    atmosphere at sea level, or at --elevation. The answer comes back in the units given; --format
    json prints SI values with their units named.

    Example:

    \b
        rimewatch cycle --refrigerant R410A --suction-pressure "118 psig" \\
            --discharge-pressure "340 psig" --suction-temp "50 degF" \\
            --liquid-temp "95 degF" --discharge-temp "160 degF" --plot cycle.png
    """
    try:
        fluid = props.get_refrigerant(refrigerant)
    except props.UnsupportedRefrigerantError as error:
        raise click.ClickException(str(error)) from None
    if plot is not None and Path(plot).suffix.lower() not in (".png", ".svg"):
        raise click.ClickException(f"--plot: {plot!r} must end in .png or .svg")

    atmosphere = 101325.0
    if elevation is not None:
        try:
            height, unit = parse_quantity(elevation, default_unit="m", kind="length")
            atmosphere = atmospheric_pressure(to_si(height, unit))
        except ValueError as error:
            raise click.ClickException(f"--elevation: {error}") from None

    options = {
        "suction_pressure": (suction_pressure, "pressure"),
        "discharge_pressure": (discharge_pressure, "pressure"),
        "liquid_pressure": (liquid_pressure, "pressure"),
        "suction_temp": (suction_temp, "temperature"),
        "liquid_temp": (liquid_temp, "temperature"),
        "discharge_temp": (discharge_temp, "temperature"),
    }
    readings, units = {}, {}
    for name, (text, kind) in options.items():
        option = "--" + name.replace("_", "-")
        readings[name], units[name] = _reading(option, text, kind, atmosphere)

    result = analyse(fluid, readings)
    virtual = virtual_sensors_block(fluid, result, readings, virtual_options)
    display = _display_units(units)
    if output_format == "json":
        given = {name: text for name, (text, _) in options.items() if text is not None}
        text = render_json(result, given, atmosphere)
        click.echo(text if virtual is None else virtual.merge_json(text))
    else:
        from rich.console import Console

        console = Console(highlight=False)
        if not console.is_terminal:  # pipes and files: wide enough for the derived table
            console = Console(highlight=False, width=110)
        render_table(result, display, atmosphere, console)
        if virtual is not None:
            virtual.render(console, display.unit_system)
    if plot is not None:
        written = _write_plot(fluid, result, readings, display, plot)
        # keep stdout pure JSON in json mode
        click.echo(f"p-h diagram written to {written}", err=output_format == "json")


def _write_plot(fluid, result, readings, display, path) -> Path:
    import pandas as pd

    from rimewatch.report.ph_diagram import ph_diagram, save_figure

    states = result["states"]
    row = {f"h{name}": states[name]["enthalpy"] for name in ("1", "2", "2s", "3", "4")}
    row.update({k: result["derived"][k] for k in ("t_evap", "t_cond", "cop")})
    row["flags"] = "; ".join(result["flags"])
    liquid = readings["liquid_pressure"]
    figure = ph_diagram(
        fluid,
        pd.DataFrame([row]),
        readings["suction_pressure"],
        readings["discharge_pressure"],
        None if np.isnan(liquid) else liquid,
        unit_system=display.unit_system,
    )
    try:
        return save_figure(figure, path)
    except OSError as error:
        raise click.ClickException(f"--plot: cannot write {path}: {error.strerror}") from None
