"""``rimewatch cycle`` with a compressor map, measured power and the charge indicator."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import yaml
from click.testing import CliRunner

from rimewatch.cli import main
from rimewatch.physics import refrigerant as props

EXAMPLE = Path(__file__).parents[2] / "docs" / "examples" / "compressor-table-r410a.csv"
KELVIN = 273.15


@pytest.fixture(scope="module")
def map_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("map") / "rw-s48.yaml"
    result = CliRunner().invoke(main, ["map", "fit", str(EXAMPLE), "-o", str(path)])
    assert result.exit_code == 0, result.output
    return path


def _readings(t_evap_c=5.0, t_cond_c=45.0, superheat=11.0, subcooling=8.3):
    """Readings in kPa absolute and degC for given dew points, superheat and subcooling."""
    p_s = props.saturation_pressure("R410A", t_evap_c + KELVIN, "dew")
    p_d = props.saturation_pressure("R410A", t_cond_c + KELVIN, "dew")
    t_liquid = props.saturation_temperature("R410A", p_d, "bubble") - subcooling - KELVIN
    return [
        "--refrigerant", "R410A",
        "--suction-pressure", f"{p_s / 1e3:.4f} kPa",
        "--discharge-pressure", f"{p_d / 1e3:.4f} kPa",
        "--suction-temp", f"{t_evap_c + superheat:.4f} degC",
        "--liquid-temp", f"{t_liquid:.4f} degC",
        "--discharge-temp", f"{t_cond_c + 30:.4f} degC",
    ]  # fmt: skip


def test_map_mass_flow_capacity_and_balance_in_json(map_file):
    args = [*_readings(), "--map", str(map_file), "--power", "2.2 kW", "--format", "json"]
    result = CliRunner().invoke(main, ["cycle", *args])
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    virtual = {k: v["value"] for k, v in document["virtual_sensors"].items()}
    # at the rating superheat the map gives the datasheet's own mass flow: row (5, 45) of the
    # table, 243.6 kg/h (docs/examples/compressor-table-r410a.csv)
    table = np.genfromtxt(EXAMPLE, delimiter=",", comments="#", skip_header=8)
    row = table[(table[:, 0] == 5.0) & (table[:, 1] == 45.0)][0]
    np.testing.assert_allclose(virtual["mass_flow_map"] * 3600.0, row[4], rtol=0.01)
    # capacity from the JSON's own state enthalpies; first-law balance closes
    h = {name: document["states"][name]["enthalpy"]["value"] for name in ("1", "2", "3", "4")}
    np.testing.assert_allclose(
        virtual["cooling_capacity"], virtual["mass_flow"] * (h["1"] - h["4"]), rtol=1e-9
    )
    np.testing.assert_allclose(
        virtual["heat_rejection"],
        virtual["cooling_capacity"] + 2200.0 - virtual["compressor_heat_loss"],
        rtol=1e-9,
    )
    assert virtual["compressor_power"] == 2200.0  # measured power wins over the map
    assert document["virtual_sensors"]["cooling_capacity"]["unit"] == "W"


def test_charge_indicator_zero_at_rated_subcooling_and_negative_below():
    options = ["--charge-model", "txv", "--charge-coefficients", "0.04"]
    options += ["--rated-subcooling", "15 degF", "--format", "json"]
    rated = CliRunner().invoke(main, ["cycle", *_readings(subcooling=15 / 1.8), *options])
    short = CliRunner().invoke(main, ["cycle", *_readings(subcooling=3.0), *options])
    assert rated.exit_code == 0 and short.exit_code == 0, rated.output + short.output
    at_rated = json.loads(rated.stdout)["virtual_sensors"]["charge_deviation"]["value"]
    below = json.loads(short.stdout)["virtual_sensors"]["charge_deviation"]["value"]
    assert abs(at_rated) < 1e-3
    # 15 F = 8.33 K rated, 3 K measured: 5.33 K short x 0.04 /K = 21 % undercharged
    np.testing.assert_allclose(below, -0.04 * (15 / 1.8 - 3.0), atol=1e-3)


def test_table_output_shows_inch_pound_virtual_sensors(map_file):
    args = ["--refrigerant", "R410A", "--suction-pressure", "118 psig"]
    args += ["--discharge-pressure", "340 psig", "--suction-temp", "50 degF"]
    args += ["--liquid-temp", "95 degF", "--discharge-temp", "160 degF", "--map", str(map_file)]
    result = CliRunner().invoke(main, ["cycle", *args])
    assert result.exit_code == 0, result.output
    assert "virtual sensors" in result.output and "Btu/h" in result.output
    assert "tons" in result.output


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["--charge-model", "txv"], "--charge-model needs --charge-coefficients"),
        (["--power", "2 parsecs"], "--power"),
        (["--map", "BROKEN"], "compressor_map.coefficients.power: expected 10 numbers"),
    ],
)
def test_bad_options_give_one_clear_line(tmp_path, map_file, extra, message):
    if "BROKEN" in extra:
        document = yaml.safe_load(map_file.read_text())
        document["compressor_map"]["coefficients"]["power"] = [1.0] * 9
        broken = tmp_path / "broken.yaml"
        broken.write_text(yaml.safe_dump(document))
        extra = ["--map", str(broken)]
    result = CliRunner().invoke(main, ["cycle", *_readings(), *extra])
    assert result.exit_code != 0
    assert message in result.output and "Traceback" not in result.output
