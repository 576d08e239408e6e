"""`rimewatch commission` end to end: site file + CSV or real SQLite database -> terminal + HTML."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest
import yaml
from click.testing import CliRunner

from rimewatch.cli import main

# The simulated units of the physics tests (CoolProp cycles with standstill nights).
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "physics"))
from commissioning_cases import swap, synthetic_unit

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
    assert result.exit_code == 0, result.output
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
    assert result.exit_code == 0, result.output
    html = (tmp_path / "commission-rtu-7.html").read_text()
    assert "refrigerant: R134a" in html or "refrigerant: R1234yf" in html


def test_bad_input_gives_one_clear_line(tmp_path, unit_frame):
    site = _site(tmp_path)
    runner = CliRunner()
    missing = runner.invoke(main, ["commission", str(site), "--csv", str(tmp_path / "nope.csv")])
    assert missing.exit_code != 0 and "no such file" in missing.output
    data = _csv(tmp_path, unit_frame.iloc[:5])
    unknown = runner.invoke(main, ["commission", str(site), "--csv", str(data), "--unit", "x"])
    assert unknown.exit_code != 0 and "'x'" in unknown.output
    since = runner.invoke(main, ["commission", str(site), "--csv", str(data), "--since", "soon"])
    assert since.exit_code != 0 and "--since" in since.output
    assert "Traceback" not in missing.output + unknown.output + since.output


def test_too_little_data_never_passes(tmp_path, unit_frame):
    site = _site(tmp_path)
    data = _csv(tmp_path, unit_frame.iloc[:5])
    result = CliRunner().invoke(
        main, ["commission", str(site), "--csv", str(data), "--out", str(tmp_path)]
    )
    assert result.exit_code == 0, result.output
    assert "NO-GO" in result.output
    html = (tmp_path / "commission-rtu-7.html").read_text()
    assert "NO-GO" in html and "fewer than the 30 needed" in html
