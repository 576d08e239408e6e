"""Virtual-sensor options of ``rimewatch cycle``: compressor map, measured power, charge indicator.

See docs/virtual-sensors.md and docs/compressor-maps.md.
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass
from pathlib import Path

import click

from rimewatch.ingest.units import UnitError, parse_quantity, to_si

# size of one degree in K, for superheat and subcooling given with their unit
_DEGREE = {"K": 1.0, "degC": 1.0, "delta_degC": 1.0, "degF": 5 / 9, "delta_degF": 5 / 9, "F": 5 / 9}
_DIFFERENCE = re.compile(r"^\s*([-+0-9.eE]+)\s*(\S+)\s*$")

# column -> (label, kind of display unit)
_ROWS = (
    ("mass_flow_map", "mass flow (compressor map)", "mass_flow"),
    ("mass_flow_balance", "mass flow (energy balance)", "mass_flow"),
    ("volumetric_efficiency_ratio", "volumetric-efficiency ratio", "ratio"),
    ("cooling_capacity", "cooling capacity", "heat"),
    ("heat_rejection", "heat rejection", "heat"),
    ("compressor_power", "compressor power", "power"),
    ("compressor_current_map", "compressor current (map)", "current"),
    ("cop", "COP", "ratio"),
    ("eer", "EER [Btu/(W h)]", "ratio"),
    ("charge_deviation", "charge deviation", "percent"),
)
_DISPLAY = {
    "SI": {"mass_flow": ("kg/h", 3600.0), "heat": ("kW", 1e-3), "power": ("kW", 1e-3)},
    "IP": {
        "mass_flow": ("lb/h", 3600.0 / 0.45359237),
        "heat": ("Btu/h", 3600.0 / 1055.05585262),
        "power": ("W", 1.0),
    },
}


def virtual_sensor_options(command):
    """Add the options to a click command (keyword arguments collected by the command)."""
    options = [
        click.option(
            "--map",
            "map_file",
            type=click.Path(exists=True, dir_okay=False, path_type=Path),
            help="Compressor map YAML (`rimewatch map fit` output): mass flow, capacity, COP.",
        ),
        click.option("--power", help="Measured compressor power, e.g. '2.9 kW'."),
        click.option("--speed", help="Compressor speed for variable-speed maps, e.g. '45 Hz'."),
        click.option(
            "--charge-model",
            type=click.Choice(["txv", "eev", "fixed_orifice"]),
            help="Expansion device of the charge indicator (needs --charge-coefficients).",
        ),
        click.option(
            "--charge-coefficients",
            help="K_SC[,K_SH] in 1/K: charge fraction per kelvin of subcooling (and superheat).",
        ),
        click.option("--rated-subcooling", help="Subcooling at correct charge, e.g. '10 degF'."),
        click.option("--rated-superheat", help="Superheat at correct charge, e.g. '6 K'."),
    ]
    for option in reversed(options):
        command = option(command)
    return command


@dataclass
class VirtualSensors:
    """One sample's virtual sensors (SI), ready to print or to add to the JSON answer."""

    values: dict[str, float]
    flags: list[str]

    def merge_json(self, text: str) -> str:
        from rimewatch.physics.virtual_sensors import COLUMNS

        document = json.loads(text)
        document["virtual_sensors"] = {
            key: {"value": value, "unit": COLUMNS[key][0], "description": COLUMNS[key][1]}
            for key, value in self.values.items()
        }
        document["virtual_sensors_flags"] = self.flags
        return json.dumps(document, indent=2, ensure_ascii=False)

    def render(self, console, unit_system: str) -> None:
        from rich.markup import escape
        from rich.table import Table

        table = Table(title="virtual sensors", title_justify="left", highlight=False)
        table.add_column("quantity")
        table.add_column("value", justify="right")
        table.add_column("unit")
        for key, label, kind in _ROWS:
            value = self.values.get(key)
            if value is None:
                continue
            if kind == "percent":
                shown, unit = f"{100 * value:+.0f}", "% of rated charge"
            elif kind == "ratio":
                shown, unit = f"{value:.2f}", ""
            elif kind == "current":
                shown, unit = f"{value:.1f}", "A"
            else:
                unit, factor = _DISPLAY[unit_system][kind]
                shown = f"{value * factor:,.1f}" if factor != 1e-3 else f"{value * factor:.2f}"
            table.add_row(escape(label), shown, escape(unit))
        if "cooling_capacity" in self.values and unit_system == "IP":
            tons = self.values["cooling_capacity"] * 3600.0 / 1055.05585262 / 12000.0
            table.add_row("cooling capacity", f"{tons:.2f}", "tons")
        console.print(table)
        for flag in self.flags:
            console.print(f"[bold]virtual sensors:[/] {escape(flag)}", highlight=False)
        console.print(
            "Virtual sensors are estimates from the map and energy balances "
            "(docs/virtual-sensors.md); confirm on site.",
            highlight=False,
        )


def _difference(option: str, text: str) -> float:
    match = _DIFFERENCE.match(text)
    if match is None or match.group(2) not in _DEGREE:
        raise click.ClickException(
            f"{option}: expected a temperature difference such as '5 K' or '10 degF', got {text!r}"
        )
    return float(match.group(1)) * _DEGREE[match.group(2)]


def _si(option: str, text: str, kind: str) -> float:
    try:
        value, unit = parse_quantity(text, kind=kind)
        return float(to_si(value, unit))
    except (UnitError, ValueError) as error:
        raise click.ClickException(f"{option}: {error}") from None


def _load_map(path: Path):
    import yaml

    from rimewatch.physics.compressor import CompressorMap, CompressorMapError

    try:
        document = yaml.safe_load(path.read_text(encoding="utf-8"))
    except (OSError, yaml.YAMLError) as error:
        raise click.ClickException(f"--map: cannot read {path}: {error}") from None
    if isinstance(document, dict) and "compressor_map" in document:
        document = document["compressor_map"]
    try:
        return CompressorMap.from_dict(document)
    except CompressorMapError as error:
        raise click.ClickException(f"--map {path}: {error}") from None


def _charge_model(options: dict):
    from rimewatch.physics.virtual_sensors import ChargeModel

    device = options.get("charge_model")
    if device is None:
        return None
    if not options.get("charge_coefficients") or not options.get("rated_subcooling"):
        raise click.ClickException(
            "--charge-model needs --charge-coefficients K_SC[,K_SH] and --rated-subcooling"
        )
    try:
        numbers = [float(x) for x in options["charge_coefficients"].split(",")]
    except ValueError:
        raise click.ClickException(
            f"--charge-coefficients: expected K_SC[,K_SH], got {options['charge_coefficients']!r}"
        ) from None
    if len(numbers) not in (1, 2):
        raise click.ClickException("--charge-coefficients: give one or two numbers")
    k_superheat = numbers[1] if len(numbers) == 2 else 0.0
    rated_superheat = options.get("rated_superheat")
    if rated_superheat is None and (k_superheat or device == "fixed_orifice"):
        raise click.ClickException("--charge-model: give --rated-superheat as well")
    try:
        return ChargeModel(
            device,
            numbers[0],
            rated_subcooling=_difference("--rated-subcooling", options["rated_subcooling"]),
            rated_superheat=(
                0.0
                if rated_superheat is None
                else _difference("--rated-superheat", rated_superheat)
            ),
            k_superheat=k_superheat,
        )
    except ValueError as error:
        raise click.ClickException(f"--charge-model: {error}") from None


def virtual_sensors_block(fluid, result: dict, readings: dict, options: dict):
    """Virtual sensors for the cycle command's one sample, or None when no option asks for them."""
    if not any(options.get(k) for k in ("map_file", "power", "charge_model")):
        return None
    import pandas as pd

    from rimewatch.physics.virtual_sensors import compute

    compressor_map = None if options.get("map_file") is None else _load_map(options["map_file"])
    if compressor_map is not None and compressor_map.refrigerant != fluid.designation:
        raise click.ClickException(
            f"--map: the map is for {compressor_map.refrigerant}, the readings for "
            f"{fluid.designation}"
        )
    power = None if options.get("power") is None else _si("--power", options["power"], "power")
    speed = None if options.get("speed") is None else _si("--speed", options["speed"], "frequency")
    if compressor_map is not None and compressor_map.variable_speed and speed is None:
        raise click.ClickException("--map: this map has several speeds; give --speed")
    states = {name: result["states"][key]["enthalpy"] for name, key in
              (("h1", "1"), ("h2", "2"), ("h3", "3"), ("h4", "4"))}  # fmt: skip
    for key in ("t_evap", "t_cond", "superheat", "subcooling"):
        states[key] = result["derived"].get(key, math.nan)
    frame = compute(
        pd.DataFrame([states]),
        readings["suction_pressure"],
        compressor_map=compressor_map,
        compressor_power=power,
        compressor_speed=speed,
        charge_model=_charge_model(options),
    )
    row = frame.iloc[0]
    values = {
        key: float(row[key])
        for key in frame.columns
        if key != "flags" and math.isfinite(float(row[key]))
    }
    return VirtualSensors(values, [f for f in str(row["flags"]).split("; ") if f])
