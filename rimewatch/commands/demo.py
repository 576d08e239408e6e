"""``rimewatch demo``: the cycles of a few invented units, printed and drawn on p-h diagrams.

Until the plant simulator exists, the readings are one fixed, plausible sample per unit of an
invented site. Each unit's controller reports in its own units, so the demo also goes through the
same unit conversion as live data.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import click
import pandas as pd

from rimewatch.ingest.units import from_si, to_si

SITE_NAME = "Hollowell Street Market (invented demo site)"


@dataclass(frozen=True)
class DemoUnit:
    """One invented refrigeration circuit and a sample of its readings (value, unit)."""

    unit_id: str
    name: str
    kind: str
    refrigerant: str
    readings: dict[str, tuple[float, str]]


DEMO_UNITS = (
    DemoUnit(
        "RTU-1",
        "Sales floor rooftop unit",
        "rooftop_unit",
        "R410A",
        {
            "suction_pressure": (128.0, "psig"),
            "discharge_pressure": (365.0, "psig"),
            "suction_temp": (56.0, "degF"),
            "liquid_temp": (99.0, "degF"),
            "discharge_temp": (172.0, "degF"),
        },
    ),
    DemoUnit(
        "CR-1",
        "Dairy cold room condensing unit",
        "cold_room_condensing_unit",
        "R744",
        {
            "suction_pressure": (26.0, "bar(g)"),
            "discharge_pressure": (88.0, "bar(g)"),
            "suction_temp": (-2.0, "degC"),
            "liquid_temp": (34.0, "degC"),
            "discharge_temp": (118.0, "degC"),
        },
    ),
    DemoUnit(
        "CH-1",
        "Chiller circuit 1 (water-cooled)",
        "chiller_circuit",
        "R134a",
        {
            "suction_pressure": (2.6, "bar(g)"),
            "discharge_pressure": (8.6, "bar(g)"),
            "suction_temp": (10.0, "degC"),
            "liquid_temp": (33.0, "degC"),
            "discharge_temp": (55.0, "degC"),
        },
    ),
    DemoUnit(
        "DC-3",
        "Deli display case (integral)",
        "cold_room_condensing_unit",
        "R290",
        {
            "suction_pressure": (2.9, "bar(g)"),
            "discharge_pressure": (14.5, "bar(g)"),
            "suction_temp": (2.0, "degC"),
            "liquid_temp": (40.0, "degC"),
            "discharge_temp": (75.0, "degC"),
        },
    ),
)

# (column, label, kind) shown per unit; kinds as in rimewatch.commands.cycle
KEY_FIGURES = (
    ("t_evap", "evaporating temperature (dew)", "temperature"),
    ("t_cond", "condensing temperature (dew)", "temperature"),
    ("superheat", "suction superheat", "difference"),
    ("subcooling", "liquid subcooling", "difference"),
    ("discharge_superheat", "discharge superheat", "difference"),
    ("refrigerating_effect", "refrigerating effect", "enthalpy"),
    ("compression_work", "compression work", "enthalpy"),
    ("cop", "COP (cooling)", "ratio"),
    ("cop_carnot", "Carnot COP", "ratio"),
    ("eta_isentropic", "isentropic efficiency", "ratio"),
)


def demo_cycles() -> pd.DataFrame:
    """One row per demo unit: its SI readings and its cycle_states columns."""
    from rimewatch.physics.cycle import cycle_states

    rows = []
    for unit in DEMO_UNITS:
        si = {role: to_si(value, u) for role, (value, u) in unit.readings.items()}
        states = cycle_states(unit.refrigerant, **si, method="exact").iloc[0]
        rows.append({"unit_id": unit.unit_id, "refrigerant": unit.refrigerant, **si, **states})
    return pd.DataFrame(rows).set_index("unit_id")


def _unit_table(unit: DemoUnit, row: pd.Series):
    from rich import box
    from rich.markup import escape
    from rich.table import Table

    ip = any(u in ("psig", "degF") for _, u in unit.readings.values())
    display = {
        "temperature": "degF" if ip else "degC",
        "difference": "delta_degF" if ip else "K",
        "enthalpy": "Btu/lb" if ip else "kJ/kg",
    }
    labels = {"degF": "°F", "degC": "°C", "delta_degF": "°F"}
    table = Table(box=box.SIMPLE_HEAD)
    table.add_column("quantity")
    table.add_column("value", justify="right")
    table.add_column("unit")
    for role, (value, u) in unit.readings.items():
        table.add_row(role.replace("_", " "), f"{value:g}", escape(labels.get(u, u)))
    for column, label, kind in KEY_FIGURES:
        value = row[column]
        unit_name = display.get(kind)
        if math.isfinite(value) and unit_name is not None:
            value = from_si(value, unit_name)
        text = f"{value:.2f}" if kind == "ratio" else f"{value:.1f}"
        table.add_row(
            label,
            text if math.isfinite(value) else "–",
            escape(labels.get(unit_name, unit_name or "-")),
        )
    return table


@click.command()
@click.option(
    "--out",
    "out_dir",
    type=click.Path(file_okay=False, path_type=Path),
    default=Path("rimewatch-demo"),
    show_default=True,
    help="Folder for the p-h diagrams and the cycle table.",
)
def demo(out_dir: Path) -> None:
    """Compute and draw the refrigerant cycles of an invented site's units.

    Prints a table per unit (readings in the units its controller reports, key figures of its
    cycle) and writes one p-h diagram per unit and a CSV of every cycle column (SI) into --out.
    All names and readings are invented.

    Example:

    \b
        rimewatch demo --out /tmp/rimewatch-demo
    """
    from rich.console import Console
    from rich.markup import escape

    from rimewatch.commands.cycle import cautions
    from rimewatch.physics.refrigerant import get_refrigerant
    from rimewatch.report.ph_diagram import ph_diagram, save_figure

    console = Console(highlight=False)
    if not console.is_terminal:
        console = Console(highlight=False, width=110)
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise click.ClickException(f"--out: cannot create {out_dir}: {error.strerror}") from None

    console.print(f"[bold]{escape(SITE_NAME)}[/]: {len(DEMO_UNITS)} units, one sample each\n")
    cycles = demo_cycles()
    written = []
    for unit in DEMO_UNITS:
        row = cycles.loc[unit.unit_id]
        fluid = get_refrigerant(unit.refrigerant)
        console.print(
            f"[bold]{escape(unit.unit_id)}[/]  {escape(unit.name)}  ·  {unit.refrigerant} "
            f"(safety class {fluid.safety_class})  ·  {unit.kind.replace('_', ' ')}"
        )
        console.print(_unit_table(unit, row))
        for flag in filter(None, str(row["flags"]).split("; ")):
            console.print(f"  [yellow]warning:[/] {escape(flag)}")
        ip = any(u in ("psig", "degF") for _, u in unit.readings.values())
        figure = ph_diagram(
            fluid,
            cycles.loc[[unit.unit_id]],
            row["suction_pressure"],
            row["discharge_pressure"],
            unit_system="IP" if ip else "SI",
            title=f"{unit.unit_id} {unit.name}: {unit.refrigerant}, COP {row['cop']:.2f}",
        )
        written.append(save_figure(figure, out_dir / f"{unit.unit_id}-ph.png"))
        console.print()

    table_path = out_dir / "cycles.csv"
    cycles.to_csv(table_path)
    shown = set()
    for unit in DEMO_UNITS:
        for line in cautions(get_refrigerant(unit.refrigerant))[:-1]:
            if line not in shown:
                shown.add(line)
                console.print(f"[bold]caution:[/] {escape(line)}")
    console.print(f"\nOutputs in {escape(str(out_dir.resolve()))}:")
    for path in [*written, table_path]:
        console.print(f"  {escape(path.name)}")
