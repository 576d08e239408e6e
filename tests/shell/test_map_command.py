"""Tests for ``rimewatch map fit`` (datasheet table -> AHRI 540 map YAML)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import yaml
from click.testing import CliRunner

from rimewatch.cli import main
from rimewatch.physics.compressor import CompressorMap

EXAMPLE = Path(__file__).parents[2] / "docs" / "examples" / "compressor-table-r410a.csv"
KELVIN = 273.15


def _table(text: str, tmp_path: Path) -> Path:
    path = tmp_path / "table.csv"
    path.write_text(text, encoding="utf-8")
    return path


def _rows():
    lines = EXAMPLE.read_text().splitlines()
    comments = [x for x in lines if x.startswith("#")]
    header, *data = [x for x in lines if x and not x.startswith("#")]
    return comments, header, data


def test_fit_writes_a_map_that_reproduces_the_table(tmp_path):
    out = tmp_path / "map.yaml"
    result = CliRunner().invoke(main, ["map", "fit", str(EXAMPLE), "-o", str(out)])
    assert result.exit_code == 0, result.output
    assert "max |error| %" in result.stderr and "worst 5 points" in result.stderr
    cmap = CompressorMap.from_dict(yaml.safe_load(out.read_text())["compressor_map"])
    assert cmap.refrigerant == "R410A" and cmap.units["mass_flow"] == "kg/h"
    table = np.genfromtxt(EXAMPLE, delimiter=",", comments="#", skip_header=8)
    t_s, t_d = table[:, 0] + KELVIN, table[:, 1] + KELVIN
    # every table point lies in the fitted envelope (its convex hull) and is reproduced
    assert cmap.in_envelope(t_s, t_d).all()
    np.testing.assert_allclose(cmap.mass_flow(t_s, t_d) * 3600.0, table[:, 4], rtol=0.01)
    np.testing.assert_allclose(cmap.power(t_s, t_d), table[:, 3], rtol=0.01)
    np.testing.assert_allclose(cmap.current(t_s, t_d), table[:, 5], rtol=0.01)


def test_mass_flow_derived_from_capacity_matches_the_published_mass_flow(tmp_path):
    # Energy balance at the rating condition: m = Q / (h1 - h3) with 11 K superheat and 8.3 K
    # subcooling (the table's rating lines); the table's own mass-flow column is the reference.
    comments, header, data = _rows()
    without = [",".join(row.split(",")[:4]) for row in data]
    head = header.rsplit(",", 2)[0]
    path = _table("\n".join([*comments, head, *without]) + "\n", tmp_path)
    result = CliRunner().invoke(main, ["map", "fit", str(path)])
    assert result.exit_code == 0, result.output
    cmap = CompressorMap.from_dict(yaml.safe_load(result.stdout)["compressor_map"])
    table = np.genfromtxt(EXAMPLE, delimiter=",", comments="#", skip_header=8)
    derived = cmap.mass_flow(table[:, 0] + KELVIN, table[:, 1] + KELVIN) * 3600.0
    np.testing.assert_allclose(derived, table[:, 4], rtol=0.005)


def test_speed_column_makes_a_variable_speed_map(tmp_path):
    comments, _, data = _rows()
    rows = []
    for speed in (30, 60):
        for row in data:
            cells = row.split(",")
            mass_flow = float(cells[4]) * speed / 60
            rows.append(f"{cells[0]},{cells[1]},{cells[3]},{mass_flow:.2f},{speed}")
    head = "evaporating_temp [degC],condensing_temp [degC],power [W],mass_flow [kg/h],speed [Hz]"
    path = _table("\n".join([*comments, head, *rows]) + "\n", tmp_path)
    result = CliRunner().invoke(main, ["map", "fit", str(path)])
    assert result.exit_code == 0, result.output
    cmap = CompressorMap.from_dict(yaml.safe_load(result.stdout)["compressor_map"])
    assert cmap.speeds == (30.0, 60.0)
    at_60 = cmap.mass_flow(278.15, 318.15, speed=60.0)
    # flow proportional to speed in this table, so 45 Hz is three quarters of 60 Hz
    np.testing.assert_allclose(cmap.mass_flow(278.15, 318.15, speed=45.0), 0.75 * at_60, rtol=1e-3)


@pytest.mark.parametrize(
    ("edit", "message"),
    [
        (lambda t: t.replace("capacity [W]", "capacity"), "column 'capacity' has no unit"),
        (lambda t: t.replace("mass_flow [kg/h]", "mass_flow [lbs/hr]"), "unknown unit 'lbs/hr'"),
        (lambda t: t.replace("# refrigerant: R410A\n", ""), "# refrigerant: R410A"),
        (lambda t: t.replace("R410A", "R999"), "not supported"),
        (lambda t: t.replace("# rated_superheat: 11 K\n", ""), "rated_superheat"),
        (lambda t: t.replace("-20,25,5140", "-20,25,five"), "table.csv:9: column 'capacity'"),
        (lambda t: t.replace("condensing_temp [degC]", "condensing_temp [degF]"), "share one unit"),
    ],
)
def test_bad_tables_are_refused_with_one_clear_line(tmp_path, edit, message):
    path = _table(edit(EXAMPLE.read_text()), tmp_path)
    result = CliRunner().invoke(main, ["map", "fit", str(path)])
    assert result.exit_code != 0
    assert message in result.output
    assert "Traceback" not in result.output
