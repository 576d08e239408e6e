"""`rimewatch commission` end to end: site file + CSV or real SQLite database -> terminal + HTML."""

from __future__ import annotations

import copy
import html as htmllib
import sys
from pathlib import Path

import pandas as pd
import pytest
import yaml
from click.testing import CliRunner

from rimewatch.cli import main

# The simulated units of the physics tests (CoolProp cycles with standstill nights).
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "physics"))
from commissioning_cases import swap, synthetic_unit

NO_GO = 3  # exit status on NO-GO, as documented in docs/commissioning.md and `--help`
BAD_INPUT = 1  # click.ClickException

COLUMNS = {
    "suction_pressure": ("Suct P", "bar"),
    "discharge_pressure": ("Disch P", "bar"),
    "liquid_pressure": ("Liq P", "bar"),
    "suction_temp": ("Suct T", "degC"),
    "discharge_temp": ("Disch T", "degC"),
    "liquid_temp": ("Liq T", "degC"),
    "outdoor_air_temp": ("OAT", "degC"),
    "return_air_temp": ("RAT", "degC"),
    "compressor_status": ("Comp", "on/off"),
}


def _site(tmp_path: Path, refrigerant: str = "R410A") -> Path:
    points = [{"role": r, "unit": u, "csv_column": c} for r, (c, u) in COLUMNS.items()]
    site = {
        "site": {"name": "Alder Lane Test Kitchen", "timezone": "UTC", "elevation_m": 0},
        "csv": {"timestamp_column": "Time"},
        "units": [
            {
                "id": "rtu-7",
                "name": "Kitchen rooftop unit",
                "kind": "rooftop_unit",
                "refrigerant": refrigerant,
                "expansion_device": "txv",
                "nominal_capacity_kW": 20,
                "points": points,
            }
        ],
    }
    path = tmp_path / "site.yaml"
    path.write_text(yaml.safe_dump(site, sort_keys=False))
    return path


def _csv(tmp_path: Path, frame) -> Path:
    out = frame.copy()
    for role in out:
        if role.endswith("_pressure"):
            out[role] = out[role] / 1e5  # Pa -> bar (absolute)
        elif role.endswith("_temp"):
            out[role] = out[role] - 273.15  # K -> degC
    out["compressor_status"] = out["compressor_status"].map({1.0: "on", 0.0: "off"})
    out = out.rename(columns={r: c for r, (c, _) in COLUMNS.items()})
    out.index = out.index.strftime("%Y-%m-%dT%H:%M:%SZ")
    path = tmp_path / "trend.csv"
    out.to_csv(path, index_label="Time")
    return path


@pytest.fixture(scope="module")
def unit_frame():
    return synthetic_unit("R410A")


def test_swapped_pressures_from_csv(tmp_path, unit_frame):
    site = _site(tmp_path)
    data = _csv(tmp_path, swap(unit_frame, "suction_pressure", "discharge_pressure"))
    out = tmp_path / "reports"
    result = CliRunner().invoke(
        main, ["commission", str(site), "--csv", str(data), "--out", str(out)]
    )
    assert result.exit_code == NO_GO, result.output
    assert "NO-GO" in result.output
    html = (out / "commission-rtu-7.html").read_text()
    assert "NO-GO: keep detection off" in html
    assert "contradicts" in html
    # the suggested correction: the column "Suct P" carries the discharge pressure
    snippet = html[html.index("replace these entries") :]
    assert "role: discharge_pressure" in snippet and "csv_column: Suct P" in snippet
    assert "certified" in html  # the trade's cautions


def test_correct_unit_from_database_is_go(tmp_path, unit_frame):
    site = _site(tmp_path)
    data = _csv(tmp_path, unit_frame)
    db = f"sqlite:///{tmp_path / 'rw.db'}"
    runner = CliRunner()
    imported = runner.invoke(main, ["import", str(site), str(data), "--db", db])
    assert imported.exit_code == 0, imported.output
    result = runner.invoke(
        main, ["commission", str(site), "--db", db, "--out", str(tmp_path), "--unit", "rtu-7"]
    )
    assert result.exit_code == 0, result.output
    assert "GO" in result.output and "NO-GO" not in result.output
    html = (tmp_path / "commission-rtu-7.html").read_text()
    assert "GO: detection can be switched on" in html
    assert "None supported by the data." in html


def test_wrong_refrigerant_in_site_file(tmp_path):
    site = _site(tmp_path, refrigerant="R410A")
    data = _csv(tmp_path, synthetic_unit("R134a", seed=3))
    result = CliRunner().invoke(
        main, ["commission", str(site), "--csv", str(data), "--out", str(tmp_path)]
    )
    assert result.exit_code == NO_GO, result.output
    html = (tmp_path / "commission-rtu-7.html").read_text()
    assert "refrigerant: R134a" in html or "refrigerant: R1234yf" in html


def test_bad_input_gives_one_clear_line(tmp_path, unit_frame):
    site = _site(tmp_path)
    runner = CliRunner()
    missing = runner.invoke(main, ["commission", str(site), "--csv", str(tmp_path / "nope.csv")])
    assert missing.exit_code == BAD_INPUT and "no such file" in missing.output
    data = _csv(tmp_path, unit_frame.iloc[:5])
    unknown = runner.invoke(main, ["commission", str(site), "--csv", str(data), "--unit", "x"])
    assert unknown.exit_code == BAD_INPUT and "'x'" in unknown.output
    since = runner.invoke(main, ["commission", str(site), "--csv", str(data), "--since", "soon"])
    assert since.exit_code == BAD_INPUT and "--since" in since.output
    assert "Traceback" not in missing.output + unknown.output + since.output


def test_too_little_data_never_passes(tmp_path, unit_frame):
    site = _site(tmp_path)
    data = _csv(tmp_path, unit_frame.iloc[:5])
    result = CliRunner().invoke(
        main, ["commission", str(site), "--csv", str(data), "--out", str(tmp_path)]
    )
    assert result.exit_code == NO_GO, result.output
    assert "NO-GO" in result.output
    html = (tmp_path / "commission-rtu-7.html").read_text()
    assert "NO-GO" in html and "fewer than the 30 needed" in html


# --- `rimewatch simulate` -> CSV + site.yaml -> mislabelled site file -> `rimewatch commission`
# The simulator writes an inch-pound site file (psig, degF) that matches its CSV; each test makes
# one mistake a controls contractor makes in that file and expects it found, NO-GO (exit 3), and
# the original entry suggested back (the site file as written is the ground truth).


@pytest.fixture(scope="module")
def simulated_site(tmp_path_factory):
    out = tmp_path_factory.mktemp("simulated")
    result = CliRunner().invoke(
        main,
        ["simulate", "--days", "2", "--seed", "5", "--climate", "mediterranean",
         "--display-units", "IP", "--out", str(out)],
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    return out, yaml.safe_load((out / "site.yaml").read_text())


def _commission_simulated(simulated_site, tmp_path, edit=None):
    """Run `rimewatch commission` on the simulated CSV with an edited copy of its site file."""
    out, document = simulated_site
    document = copy.deepcopy(document)
    if edit is not None:
        edit(document["units"][0])
    site = tmp_path / "site.yaml"
    site.write_text(yaml.safe_dump(document, sort_keys=False))
    result = CliRunner().invoke(
        main, ["commission", str(site), "--csv", str(out / "rtu-1.csv"), "--out", str(tmp_path)]
    )
    html = (tmp_path / "commission-rtu-1.html").read_text()
    suggested = None
    if "replace these entries" in html:
        block = html[html.index("<pre>", html.index("Suggested corrections")) + 5 :]
        suggested = yaml.safe_load(htmllib.unescape(block[: block.index("</pre>")]))
    return result, suggested


def _point(unit, role):
    return next(p for p in unit["points"] if p["role"] == role)


def _suggested_point(suggested, column):
    return next(p for p in suggested["points"] if p["csv_column"] == column)


def test_simulated_unit_as_written_is_go(simulated_site, tmp_path):
    result, suggested = _commission_simulated(simulated_site, tmp_path)
    assert result.exit_code == 0, result.output
    assert "NO-GO" not in result.output and "GO" in result.output
    assert suggested is None


def test_site_file_with_swapped_pressure_columns(simulated_site, tmp_path):
    def swap_columns(unit):
        suction, discharge = _point(unit, "suction_pressure"), _point(unit, "discharge_pressure")
        suction["csv_column"], discharge["csv_column"] = (
            discharge["csv_column"],
            suction["csv_column"],
        )

    result, suggested = _commission_simulated(simulated_site, tmp_path, swap_columns)
    assert result.exit_code == NO_GO, result.output
    assert "NO-GO" in result.output
    # the column holding the true suction pressure goes back to the suction_pressure role
    assert _suggested_point(suggested, "suction_pressure")["role"] == "suction_pressure"
    assert _suggested_point(suggested, "discharge_pressure")["role"] == "discharge_pressure"


def test_site_file_with_psig_declared_psia(simulated_site, tmp_path):
    # gauge pressure logged as absolute: 14.7 psi (one atmosphere, ISO 2533) too low
    result, suggested = _commission_simulated(
        simulated_site, tmp_path, lambda unit: _point(unit, "suction_pressure").update(unit="psia")
    )
    assert result.exit_code == NO_GO, result.output
    point = _suggested_point(suggested, "suction_pressure")
    assert (point["role"], point["unit"]) == ("suction_pressure", "psig")
    assert len(suggested["points"]) == 1


def test_site_file_with_degf_declared_degc(simulated_site, tmp_path):
    result, suggested = _commission_simulated(
        simulated_site, tmp_path, lambda unit: _point(unit, "liquid_temp").update(unit="degC")
    )
    assert result.exit_code == NO_GO, result.output
    point = _suggested_point(suggested, "liquid_temp")
    assert (point["role"], point["unit"]) == ("liquid_temp", "degF")
    assert len(suggested["points"]) == 1


def test_site_file_with_wrong_refrigerant(simulated_site, tmp_path):
    result, suggested = _commission_simulated(
        simulated_site, tmp_path, lambda unit: unit.update(refrigerant="R134a")
    )
    assert result.exit_code == NO_GO, result.output
    # R410A as simulated; R32 has nearly the same saturation pressures (NIST WebBook, from
    # memory: 1.65 vs 1.69 MPa at 25 degC), so either may be named, with the other as equal.
    assert suggested["refrigerant"] in ("R410A", "R32")
    assert "points" not in suggested  # no sensor is blamed for the refrigerant


def test_simulated_night_without_running_is_no_go(simulated_site, tmp_path):
    out, document = simulated_site
    site = tmp_path / "site.yaml"
    site.write_text(yaml.safe_dump(document, sort_keys=False))
    frame = pd.read_csv(out / "rtu-1.csv")
    night = frame[frame["timestamp"].str.slice(11, 13).isin(["21", "22", "23"])].iloc[:180]
    assert set(night["compressor_status"].dropna()) <= {0.0}
    night.to_csv(tmp_path / "night.csv", index=False)
    result = CliRunner().invoke(
        main,
        ["commission", str(site), "--csv", str(tmp_path / "night.csv"), "--out", str(tmp_path)],
    )
    assert result.exit_code == NO_GO, result.output
    html = (tmp_path / "commission-rtu-1.html").read_text()
    assert "running checks" in html and "fewer than the 30 needed" in html
