"""init, apply, import, points and quarantine through the real CLI (click's CliRunner)."""

from __future__ import annotations

import time

import yaml
from click.testing import CliRunner
from sqlalchemy import text

from rimewatch.cli import main
from rimewatch.site import load_site
from rimewatch.store import connect, write_readings

pytest_plugins = ["db_backends"]


def invoke(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def test_init_writes_a_valid_example_and_refuses_to_overwrite(tmp_path):
    path = tmp_path / "site.yaml"
    result = invoke("init", path)
    assert result.exit_code == 0 and path.exists()
    assert load_site(path).site.name == "Birchfield Corner Grocery"
    assert "# " in path.read_text()  # commented
    again = invoke("init", path)
    assert again.exit_code != 0 and "--force" in again.output


def test_apply_import_points_quarantine_reprocess(db_url, tmp_path):
    site = tmp_path / "site.yaml"
    invoke("init", site)
    result = invoke("apply", site, "--db", db_url)
    assert result.exit_code == 0, result.output
    assert "added unit freezer-1" in result.output and "caution: R290 is flammable" in result.output
    assert "already matches" in invoke("apply", site, "--db", db_url).output

    csv = tmp_path / "export.csv"
    csv.write_text(
        "Time;RTU1 Suction Press;Freezer Room T\n"
        "01.07.2024 12:00:00;118,5;-20\n"
        "01.07.2024 12:15:00;118,7;253\n"  # 253 "degC" is far above any room temperature
    )
    result = invoke("import", site, csv, "--db", db_url)
    assert result.exit_code == 0, result.output
    assert "3 readings stored" in result.output and "1 quarantined" in result.output
    result = invoke("import", site, csv, "--db", db_url)
    assert "0 readings stored, 3 already stored" in result.output
    only = invoke("import", site, csv, "--db", db_url, "--unit", "nope")
    assert only.exit_code != 0 and "unit 'nope' is not in the site file" in only.output

    listed = invoke("quarantine", "list", "--db", db_url)
    assert "Freezer Room T" in listed.output and "1 of 1 entries" in listed.output

    engine = connect(db_url)
    with engine.connect() as conn:
        point_id = conn.execute(text("SELECT id FROM points WHERE role = 'box_temp'")).scalar()
    write_readings(engine, [(point_id, time.time_ns() // 1_000_000 - 60_000, 253.15)])
    result = invoke("points", "--db", db_url, "--site", "Birchfield Corner Grocery")
    assert result.exit_code == 0
    box_line = next(line for line in result.output.splitlines() if "box_temp" in line)
    assert "-20 degC" in box_line and "1m" in box_line and "STALE" not in box_line
    suction_line = next(
        line for line in result.output.splitlines() if "rtu-1" in line and "suction_pres" in line
    )
    assert "STALE" in suction_line  # its last value is from 2024
    # 118.7 psig at 190 m: 118.7 * 6894.757 Pa + ISO 2533 atmosphere, shown as bar abs
    assert "9.175 bar abs" in suction_line

    # The fix: this export gives the freezer room in kelvin, not degC. The first line (-20) was
    # plausible in degC and stays stored; the quarantined 253 K is now plausible.
    document = yaml.safe_load(site.read_text())
    freezer = document["units"][1]
    box = next(p for p in freezer["points"] if p["role"] == "box_temp")
    box["unit"] = "K"
    site.write_text(yaml.safe_dump(document, sort_keys=False))
    result = invoke("quarantine", "reprocess", site, "--db", db_url)
    assert "changed point freezer-1/box_temp" in result.output
    assert "reprocessed 1 csv and 0 mqtt entries (1 readings stored); 0 remain" in result.output
    assert "0 of 0 entries" in invoke("quarantine", "list", "--db", db_url).output


def test_bad_input_is_one_clear_line(tmp_path):
    bad = tmp_path / "bad.yaml"
    bad.write_text("site: {name: X}\nunits:\n  - {id: a}\n")
    result = invoke("apply", bad, "--db", f"sqlite:///{tmp_path / 'x.db'}")
    assert result.exit_code == 1
    assert f"{bad}: units[0].name: required field is missing" in result.output
    assert "Traceback" not in result.output
    result = invoke("apply", bad, "--db", "nosuchdriver://x")
    assert result.exit_code == 1 and "Error:" in result.output
