"""``rimewatch map``: compressor maps (AHRI 540 polynomials) from datasheet tables.

The table layout is documented in docs/compressor-maps.md.
"""

from __future__ import annotations

import io
import re
from pathlib import Path

import click
import numpy as np
import pandas as pd
import yaml
from rich.console import Console
from rich.markup import escape
from rich.table import Table

from rimewatch.physics.compressor import (
    QUANTITIES,
    QUANTITY_UNITS,
    SPEED_UNITS,
    TEMPERATURE_UNITS,
    CompressorMapError,
    fit_errors,
    fit_map,
    mass_flow_from_capacity,
)
from rimewatch.physics.refrigerant import UnsupportedRefrigerantError, get_refrigerant

TEMPERATURE_COLUMNS = ("evaporating_temp", "condensing_temp")
# size of one degree of each temperature unit in K, for superheat and subcooling
DEGREE = {"K": 1.0, "degC": 1.0, "degF": 5.0 / 9.0}
METADATA_KEYS = (
    "refrigerant", "model", "source", "rated_superheat", "rated_return_gas_temp",
    "rated_subcooling", "speed",
)  # fmt: skip
_HEADER = re.compile(r"^\s*([A-Za-z_]+)\s*\[\s*([^\]]+?)\s*\]\s*$")
_QUANTITY_TEXT = re.compile(r"^\s*([-+0-9.eE]+)\s*(\S+)\s*$")


class TableError(ValueError):
    """A performance table that cannot be read; the message names the line or column."""


def read_performance_table(path: Path) -> tuple[pd.DataFrame, dict[str, str], dict[str, str]]:
    """Read a datasheet table: (numbers by column, column -> unit, ``# key: value`` metadata)."""
    metadata: dict[str, str] = {}
    data_lines = []
    for number, line in enumerate(path.read_text(encoding="utf-8-sig").splitlines(), start=1):
        stripped = line.strip()
        if stripped.startswith("#"):
            key, colon, value = stripped.lstrip("#").partition(":")
            key = key.strip().lower()
            if colon and key in METADATA_KEYS:
                metadata[key] = value.strip()
            continue
        if stripped:
            data_lines.append((number, line))
    if not data_lines:
        raise TableError(f"{path}: no header line and no data")
    header_number, header = data_lines[0]
    columns: dict[str, str] = {}
    names = []
    for cell in header.split(","):
        match = _HEADER.match(cell)
        if match is None:
            raise TableError(
                f"{path}:{header_number}: column {cell.strip()!r} has no unit; write it as "
                "'name [unit]', e.g. 'evaporating_temp [degC]'"
            )
        name, unit = match.groups()
        if name in columns:
            raise TableError(f"{path}:{header_number}: column {name!r} appears twice")
        columns[name] = unit
        names.append(name)
    text = "\n".join(line for _, line in data_lines[1:])
    try:
        frame = pd.read_csv(io.StringIO(text), header=None, names=names, skip_blank_lines=True)
    except (pd.errors.ParserError, ValueError) as error:
        raise TableError(f"{path}: {error}") from error
    for name in names:
        numbers = pd.to_numeric(frame[name], errors="coerce")
        bad = numbers.isna() & frame[name].notna()
        if bad.any():
            row = int(np.flatnonzero(bad.to_numpy())[0])
            raise TableError(
                f"{path}:{data_lines[row + 1][0]}: column {name!r}: "
                f"not a number ({frame[name].iloc[row]!r})"
            )
        frame[name] = numbers.astype(float)
    return frame, columns, metadata


def _quantity(text: str, where: str, units) -> tuple[float, str]:
    match = _QUANTITY_TEXT.match(text)
    if match is None or match.group(2) not in units:
        raise TableError(
            f"{where}: expected a number and a unit ({', '.join(units)}), got {text!r}"
        )
    return float(match.group(1)), match.group(2)


def build_map(path: Path):
    """Read and fit a performance table; returns (map, table frame, quantity columns, speed)."""
    frame, columns, metadata = read_performance_table(path)
    for name in TEMPERATURE_COLUMNS:
        if name not in columns:
            raise TableError(f"{path}: column '{name} [degC|degF|K]' is missing")
        if columns[name] not in TEMPERATURE_UNITS:
            raise TableError(
                f"{path}: column {name}: unknown unit {columns[name]!r}; "
                f"known: {', '.join(TEMPERATURE_UNITS)}"
            )
    temperature_unit = columns["evaporating_temp"]
    if columns["condensing_temp"] != temperature_unit:
        raise TableError(f"{path}: evaporating_temp and condensing_temp must share one unit")
    scale, offset = TEMPERATURE_UNITS[temperature_unit]

    refrigerant = metadata.get("refrigerant")
    if not refrigerant:
        raise TableError(f"{path}: add a line '# refrigerant: R410A' (the table's refrigerant)")
    try:
        refrigerant = get_refrigerant(refrigerant).designation
    except UnsupportedRefrigerantError as error:
        raise TableError(f"{path}: # refrigerant: {error}") from error

    rating = {}
    if ("rated_superheat" in metadata) == ("rated_return_gas_temp" in metadata):
        raise TableError(
            f"{path}: give exactly one of '# rated_superheat: 11.1 K' or "
            "'# rated_return_gas_temp: 18.3 degC' (the table's rating suction condition)"
        )
    if "rated_superheat" in metadata:
        value, unit = _quantity(metadata["rated_superheat"], f"{path}: # rated_superheat", DEGREE)
        rating["rated_superheat"] = value * DEGREE[unit] / DEGREE[temperature_unit]
    else:
        where = f"{path}: # rated_return_gas_temp"
        value, unit = _quantity(metadata["rated_return_gas_temp"], where, TEMPERATURE_UNITS)
        kelvin = value * TEMPERATURE_UNITS[unit][0] + TEMPERATURE_UNITS[unit][1]
        rating["rated_return_gas_temp"] = (kelvin - offset) / scale

    suction = frame["evaporating_temp"].to_numpy()
    discharge = frame["condensing_temp"].to_numpy()
    values, units = {}, {}
    for name, unit in columns.items():
        if name in QUANTITY_UNITS:
            if unit not in QUANTITY_UNITS[name]:
                raise TableError(
                    f"{path}: column {name}: unknown unit {unit!r}; "
                    f"known: {', '.join(QUANTITY_UNITS[name])}"
                )
            values[name] = frame[name].to_numpy()
            units[name] = unit
    speed, speed_unit = None, "Hz"
    if "speed" in columns:
        speed_unit = columns["speed"]
        if speed_unit not in SPEED_UNITS:
            raise TableError(f"{path}: column speed: unknown unit {speed_unit!r}; known: Hz, rpm")
        speed = frame["speed"].to_numpy()
    if "mass_flow" not in values:
        if "capacity" not in values or "rated_subcooling" not in metadata:
            raise TableError(
                f"{path}: no mass_flow column; give one, or a capacity column plus "
                "'# rated_subcooling: 8.3 K' so mass flow can be derived from capacity"
            )
        sub, unit = _quantity(metadata["rated_subcooling"], f"{path}: # rated_subcooling", DEGREE)
        t_s = suction * scale + offset
        t_d = discharge * scale + offset
        if "rated_superheat" in rating:
            t_rated = t_s + rating["rated_superheat"] * scale
        else:
            t_rated = np.full_like(t_s, rating["rated_return_gas_temp"] * scale + offset)
        capacity_w = values["capacity"] * QUANTITY_UNITS["capacity"][units["capacity"]]
        derived = mass_flow_from_capacity(
            refrigerant, t_s, t_d, capacity_w, t_rated, sub * DEGREE[unit]
        )
        values = {"mass_flow": derived * 3600.0, **values}
        units = {"mass_flow": "kg/h", **units}
    order = [q for q in QUANTITIES if q in values]
    values = {q: values[q] for q in order}
    units = {q: units[q] for q in order}
    cmap = fit_map(
        suction,
        discharge,
        values,
        units,
        refrigerant=refrigerant,
        temperature_unit=temperature_unit,
        speed=speed,
        speed_unit=speed_unit,
        model=metadata.get("model", ""),
        source=metadata.get("source", "") or path.name,
        **rating,
    )
    return cmap, frame, values, speed


def _print_quality(console: Console, cmap, frame, values, speed, worst: int) -> None:
    errors = fit_errors(
        cmap, frame["evaporating_temp"], frame["condensing_temp"], values, speed=speed
    )
    summary = Table(title="AHRI 540 fit quality (map - table) / table")
    for heading in ("quantity", "unit", "points", "max |error| %", "RMS error %"):
        summary.add_column(heading, justify="right" if heading != "quantity" else "left")
    worst_rows = []
    for quantity, error in errors.items():
        finite = np.isfinite(error)
        summary.add_row(
            quantity,
            cmap.units[quantity],
            str(int(finite.sum())),
            f"{np.nanmax(np.abs(error)):.3f}",
            f"{np.sqrt(np.nanmean(error**2)):.3f}",
        )
        for index in np.flatnonzero(finite):
            worst_rows.append((abs(error[index]), quantity, index, error[index]))
    console.print(summary)
    worst_rows.sort(reverse=True)
    t_unit = cmap.temperature_unit
    points = Table(title=f"worst {worst} points")
    headings = ["quantity", f"evaporating [{t_unit}]", f"condensing [{t_unit}]"]
    if speed is not None:
        headings.append(f"speed [{cmap.speed_unit}]")
    for heading in (*headings, "table", "map", "error %"):
        points.add_column(escape(heading), justify="left" if heading == "quantity" else "right")
    for _, quantity, index, error in worst_rows[:worst]:
        table_value = values[quantity][index]
        cells = [
            quantity,
            f"{frame['evaporating_temp'].iloc[index]:g}",
            f"{frame['condensing_temp'].iloc[index]:g}",
        ]
        if speed is not None:
            cells.append(f"{speed[index]:g}")
        cells += [f"{table_value:.5g}", f"{table_value * (1 + error / 100):.5g}", f"{error:+.3f}"]
        points.add_row(*cells)
    console.print(points)


class _MapDumper(yaml.SafeDumper):
    """YAML with coefficient lists and polygon vertices on one line each."""


def _represent_list(dumper: yaml.SafeDumper, items: list):
    flat = all(isinstance(x, (int, float)) for x in items)
    return dumper.represent_sequence("tag:yaml.org,2002:seq", items, flow_style=flat)


_MapDumper.add_representer(list, _represent_list)


@click.group(name="map")
def map_group() -> None:
    """Compressor maps (AHRI 540 ten-coefficient polynomials)."""


@map_group.command(name="fit")
@click.argument("table", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option(
    "-o",
    "--output",
    type=click.Path(dir_okay=False, path_type=Path),
    help="Write the map YAML here (default: print it).",
)
@click.option("--worst", default=5, show_default=True, help="How many worst points to list.")
def fit(table: Path, output: Path | None, worst: int) -> None:
    """Fit AHRI 540 coefficients to a compressor datasheet TABLE (CSV, units in the header).

    Fits mass flow, power, current and capacity (whichever columns the table has) by least
    squares, prints the fit quality (maximum and RMS error, worst points) and writes the
    `compressor_map:` block of a unit description. Layout: docs/compressor-maps.md.

    Example:

    \b
        rimewatch map fit docs/examples/compressor-table-r410a.csv -o rw-s48.yaml
    """
    try:
        cmap, frame, values, speed = build_map(table)
    except (TableError, CompressorMapError) as error:
        raise click.ClickException(str(error)) from error
    _print_quality(Console(stderr=True), cmap, frame, values, speed, worst)
    text = yaml.dump({"compressor_map": cmap.to_dict()}, Dumper=_MapDumper, sort_keys=False)
    if output is None:
        click.echo(text, nl=False)
    else:
        output.write_text(text, encoding="utf-8")
        click.echo(f"wrote {output}", err=True)
