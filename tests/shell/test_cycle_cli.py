"""``rimewatch cycle`` end to end through the CLI group: units in, same units out, SI in JSON."""

import json
import re

import pytest
from click.testing import CliRunner
from matplotlib.image import imread

from rimewatch.cli import main
from rimewatch.physics.cycle import cycle_states

EXAMPLE = [
    "cycle",
    "--refrigerant",
    "R410A",
    "--suction-pressure",
    "118 psig",
    "--discharge-pressure",
    "340 psig",
    "--suction-temp",
    "50 degF",
    "--liquid-temp",
    "95 degF",
    "--discharge-temp",
    "160 degF",
]
PSI = 6894.757  # Pa per psi, NIST SP 811


def run(*args):
    return CliRunner().invoke(main, list(args))


def row_value(output: str, label: str) -> float:
    match = re.search(rf"{re.escape(label)}\s+(-?[\d.]+)", output)
    assert match, f"{label!r} not in output:\n{output}"
    return float(match.group(1))


@pytest.fixture(scope="module")
def example_table():
    result = run(*EXAMPLE)
    assert result.exit_code == 0, result.output
    return result.output


def test_example_prints_the_users_units(example_table):
    out = example_table
    assert "118.0 psig" in out and "340.0 psig" in out
    assert "T [°F]" in out and "h [Btu/lb]" in out
    assert "R410A" in out and "safety class A1" in out
    # R410A pressure-temperature chart (from memory, common practice on site): 118 psig is about
    # 40 degF and 340 psig about 105 degF dew point.
    assert row_value(out, "evaporating temperature (dew)") == pytest.approx(40.0, abs=1.0)
    assert row_value(out, "condensing temperature (dew)") == pytest.approx(105.0, abs=1.5)
    # superheat is a difference in Fahrenheit degrees (1 K = 1.8 delta degF), not kelvins
    t_evap_f = row_value(out, "evaporating temperature (dew)")
    assert row_value(out, "suction superheat") == pytest.approx(50.0 - t_evap_f, abs=0.11)
    assert "caution:" in out and "certified" in out


def test_example_figures_are_physically_sound(example_table):
    out = example_table
    # First law per kg: heat rejected = refrigerating effect + compression work (rounding 0.15)
    q_evap = row_value(out, "refrigerating effect")
    work = row_value(out, "compression work (actual)")
    assert row_value(out, "heat rejection") == pytest.approx(q_evap + work, abs=0.15)
    # Second law: the cycle's COP stays below the Carnot COP between its saturation temperatures
    assert row_value(out, "COP (cooling)") < row_value(out, "Carnot COP")
    assert 0.0 < row_value(out, "isentropic efficiency") < 1.0


def test_json_is_si_and_matches_cycle_states():
    result = run(*EXAMPLE, "--format", "json")
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    state1 = document["states"]["1"]
    # 118 psig + one standard atmosphere; 50 degF = (50 + 459.67) / 1.8 K (NIST SP 811)
    assert state1["pressure"] == {"value": pytest.approx(118 * PSI + 101325.0), "unit": "Pa"}
    assert state1["temperature"]["value"] == pytest.approx((50 + 459.67) / 1.8)
    assert state1["temperature"]["unit"] == "K"
    assert document["readings"]["suction_pressure"] == "118 psig"
    expected = cycle_states(
        "R410A",
        118 * PSI + 101325.0,
        340 * PSI + 101325.0,
        suction_temp=(50 + 459.67) / 1.8,
        liquid_temp=(95 + 459.67) / 1.8,
        discharge_temp=(160 + 459.67) / 1.8,
        method="exact",
    ).iloc[0]
    for key in ("t_evap", "superheat", "subcooling", "cop", "eta_isentropic", "pressure_ratio"):
        assert document["derived"][key]["value"] == pytest.approx(expected[key], rel=1e-6), key
    assert document["derived"]["superheat"]["unit"] == "K"
    assert document["derived"]["refrigerating_effect"]["unit"] == "J/kg"
    assert document["states"]["2s"]["enthalpy"]["value"] == pytest.approx(expected["h2s"])
    assert document["flags"] == []


def test_si_readings_come_back_in_si_display_units():
    result = run(
        "cycle", "-r", "R134a", "--suction-pressure", "1.8 bar(g)", "--discharge-pressure",
        "9.5 bar(g)", "--suction-temp", "5 degC", "--liquid-temp", "35 degC",
        "--discharge-temp", "60 degC",
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    assert "1.80 bar(g)" in result.output and "T [°C]" in result.output
    assert "h [kJ/kg]" in result.output
    assert re.search(r"suction superheat\s+[\d.]+\s+K", result.output)
    # R134a at 2.8 bar abs: dew point about -1.2 degC (NIST WebBook, from memory)
    assert row_value(result.output, "evaporating temperature (dew)") == pytest.approx(-1.2, abs=0.6)


def test_elevation_changes_gauge_conversion():
    result = run(*EXAMPLE, "--elevation", "1000", "--format", "json")
    document = json.loads(result.stdout)
    # ISO 2533 standard atmosphere at 1000 m: 89875 Pa (from memory)
    assert document["atmospheric_pressure"]["value"] == pytest.approx(89875.0, abs=2.0)
    p1 = document["states"]["1"]["pressure"]["value"]
    assert p1 == pytest.approx(118 * PSI + 89875.0, abs=2.0)


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["--suction-pressure", "118 furlongs"], "furlongs"),
        (["--suction-pressure", "118 psi"], "ambiguous"),
        (["--suction-pressure", "118 degF"], "not a pressure unit"),
        (["--suction-temp", "50 psig"], "not a temperature unit"),
        (["--suction-pressure", "lots"], "cannot read"),
        (["--suction-pressure", "-20 psig"], "below absolute zero"),
        (["--suction-pressure", "1e400 psig"], "not a finite number"),
        (["--refrigerant", "R999"], "supported: R22"),
        (["--plot", "cycle.pdf"], ".png or .svg"),
        (["--elevation", "40000 ft"], "--elevation"),
    ],
)
def test_bad_input_gives_one_clear_line(args, fragment):
    result = run(*EXAMPLE, *args)
    assert result.exit_code != 0
    lines = result.output.strip().splitlines()
    assert len(lines) == 1, result.output
    assert lines[0].startswith("Error:") and fragment in lines[0]
    assert "Traceback" not in result.output


def test_transcritical_r744_says_condensing_and_subcooling_do_not_apply():
    # R744 critical pressure 73.77 bar (NIST WebBook): a 90 bar gas cooler is transcritical
    result = run(
        "cycle", "-r", "R744", "--suction-pressure", "30 bar", "--discharge-pressure", "90 bar",
        "--suction-temp", "-2 degC", "--liquid-temp", "35 degC", "--discharge-temp", "110 degC",
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    flat = " ".join(result.output.split())
    assert "warning: transcritical" in flat
    assert "condensing temperature and subcooling do not apply" in flat
    assert "gas cooler outlet" in flat
    assert re.search(r"condensing temperature \(dew\)\s+–", result.output)
    assert "R744 runs at very high pressures" in flat


def test_missing_discharge_temperature_is_allowed_and_said():
    args = EXAMPLE[: EXAMPLE.index("--discharge-temp")]
    result = run(*args)
    assert result.exit_code == 0, result.output
    flat = " ".join(result.output.split())
    assert "no discharge temperature" in flat
    assert re.search(r"compression work \(actual\)\s+–", result.output)
    assert row_value(result.output, "compression work (isentropic)") > 0


def test_flammable_and_toxic_refrigerants_carry_their_caution():
    r32 = run("cycle", "-r", "R32", "--suction-pressure", "8.5 bar(g)", "--discharge-pressure",
              "26 bar(g)", "--suction-temp", "12 degC")  # fmt: skip
    assert "A2L, mildly flammable" in " ".join(r32.output.split())
    nh3 = run("cycle", "-r", "R717", "--suction-pressure", "2.5 bar", "--discharge-pressure",
              "12 bar", "--suction-temp", "-5 degC")  # fmt: skip
    assert "B2L: toxic" in " ".join(nh3.output.split())


def test_plot_written_and_json_stays_parseable(tmp_path):
    target = tmp_path / "cycle.png"
    result = run(*EXAMPLE, "--format", "json", "--plot", str(target))
    assert result.exit_code == 0, result.output
    json.loads(result.stdout)
    assert imread(target).shape[0] > 300
    assert "p-h diagram written to" in result.stderr


def test_help_has_an_example():
    result = run("cycle", "--help")
    assert result.exit_code == 0 and "Example:" in result.output and "psig" in result.output


def test_liquid_warmer_than_condensing_is_a_warning():
    args = [*EXAMPLE]
    args[args.index("95 degF")] = "110 degF"  # bubble point at 340 psig is about 105 degF
    result = run(*args)
    assert result.exit_code == 0
    assert "warning: liquid warmer than the condensing bubble point" in result.output


def test_zeotropic_evaporator_inlet_state_matches_a_coolprop_ph_flash():
    # R407C glides ~6 K: state 4's temperature and entropy, interpolated by quality in the command,
    # checked against CoolProp's own (p, h) flash of the blend.
    from CoolProp.CoolProp import PropsSI

    result = run(
        "cycle", "-r", "R407C", "--suction-pressure", "4.2 bar(g)", "--discharge-pressure",
        "17 bar(g)", "--suction-temp", "8 degC", "--liquid-temp", "36 degC", "--format", "json",
    )  # fmt: skip
    state4 = json.loads(result.stdout)["states"]["4"]
    p4, h4 = state4["pressure"]["value"], state4["enthalpy"]["value"]
    assert state4["temperature"]["value"] == pytest.approx(
        PropsSI("T", "P", p4, "H", h4, "R407C"), abs=0.3
    )
    assert state4["entropy"]["value"] == pytest.approx(
        PropsSI("S", "P", p4, "H", h4, "R407C"), rel=1e-3
    )


def test_a_reading_outside_the_property_range_is_said():
    # 5000 degF is far above the R410A equation of state's validity (CoolProp Tmax ~ 500 K)
    args = [*EXAMPLE]
    args[args.index("50 degF")] = "5000 degF"
    result = run(*args)
    assert result.exit_code == 0
    flat = " ".join(result.output.split())
    assert "suction temp is outside -100..200 degC" in flat
    assert "state 2s (ideal discharge) could not be computed" in flat
