"""``rimewatch demo`` runs the whole pipeline into a folder by itself (real SQLite, real files)."""

import json
import sqlite3

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from matplotlib.image import imread

from rimewatch.cli import main
from rimewatch.commands.demo import DB_FILE, DEMO_UNITS

DAYS = "3"


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "out"
    result = CliRunner().invoke(main, ["demo", "--out", str(out), "--days", DAYS])
    assert result.exit_code == 0, result.output
    return out, " ".join(result.output.split())


def _stored_counts(out):
    with sqlite3.connect(out / DB_FILE) as db:
        return dict(
            db.execute(
                "SELECT u.key, count(*) FROM readings r JOIN points p ON p.id = r.point_id "
                "JOIN units u ON u.id = p.unit_id GROUP BY u.key"
            ).fetchall()
        )


def test_demo_stores_every_readable_cell_and_quarantines_the_rest(demo_run):
    out, _ = demo_run
    counts = _stored_counts(out)
    with sqlite3.connect(out / DB_FILE) as db:
        quarantined = db.execute("SELECT count(*) FROM quarantine").fetchone()[0]
    cells = 0
    for unit in DEMO_UNITS:
        table = pd.read_csv(out / "data" / f"{unit.unit_id}.csv", index_col="timestamp")
        assert len(table) == float(DAYS) * 1440  # one line per simulated minute
        cells += int(table.notna().sum().sum())
        assert counts[unit.unit_id] > 0.9 * table.notna().sum().sum()
    # Conservation: every non-empty cell is either a stored reading or a quarantined value
    assert sum(counts.values()) + quarantined == cells


def test_demo_converts_the_logged_units_to_si(demo_run):
    out, _ = demo_run
    table = pd.read_csv(out / "data" / "rtu-1.csv", index_col="timestamp")
    first = table["rtu-1/suction_pressure"].dropna().iloc[:50]
    with sqlite3.connect(out / DB_FILE) as db:
        stored = db.execute(
            "SELECT r.value FROM readings r JOIN points p ON p.id = r.point_id "
            "JOIN units u ON u.id = p.unit_id WHERE u.key = 'rtu-1' "
            "AND p.role = 'suction_pressure' ORDER BY r.ts_ms LIMIT 50"
        ).fetchall()
    site = (out / "site.yaml").read_text()
    assert "unit: psig" in site and "elevation_m: 180.0" in site
    # psig -> Pa absolute: 1 psi = 6894.757 Pa (NIST SP 811); atmosphere at 180 m from the
    # ISO 2533 standard atmosphere, p = 101325 (1 - 2.25577e-5 h)^5.25588 = 99 191 Pa
    atmosphere = 101325.0 * (1 - 2.25577e-5 * 180.0) ** 5.25588
    expected = first.to_numpy() * 6894.757 + atmosphere
    np.testing.assert_allclose([v for (v,) in stored], expected, rtol=1e-6)


def test_demo_writes_reports_diagrams_and_a_physically_sound_summary(demo_run):
    out, output = demo_run
    for unit in DEMO_UNITS:
        assert unit.unit_id in output
        assert imread(out / f"{unit.unit_id}-ph.png").shape[0] > 300  # a real, decodable PNG
        html = (out / f"commission-{unit.unit_id}.html").read_text()
        assert unit.unit_id in html and ("GO" in html)
    daily = pd.read_csv(out / "daily-summary.csv")
    assert set(daily["unit"]) == {u.unit_id for u in DEMO_UNITS}
    # Second law: no daily median cycle beats Carnot between its median saturation temperatures
    # (days whose every sample has flash gas in the liquid line have no COP: left out)
    known = daily.dropna(subset=["cop_virtual", "cooling_capacity"])
    assert len(known) >= 0.8 * len(daily)
    carnot = known["t_evap"] / (known["t_cond"] - known["t_evap"])
    assert (known["cop_virtual"] < carnot).all()
    assert (known["cop_virtual"] > 1.0).all() and (known["cooling_capacity"] > 0).all()
    truth = json.loads((out / "ground_truth.json").read_text())
    assert truth["sp-1"]["faults"] == [] and truth["rtu-1"]["faults"][0]["code"] == "low_charge"
    assert str(out.resolve()) in output
    assert "ground truth" in output and "caution:" in output
    assert "A2L" in output  # R32 is class A2L (ASHRAE 34)


def _stored_events(out) -> dict:
    with sqlite3.connect(out / DB_FILE) as db:
        rows = db.execute(
            "SELECT u.key, e.code FROM events e JOIN units u ON u.id = e.unit_id"
        ).fetchall()
    events = {}
    for unit, code in rows:
        events.setdefault(unit, []).append(code)
    return events


def test_demo_detection_stores_events_and_spares_the_healthy_unit(demo_run):
    out, output = demo_run
    events = _stored_events(out)
    findings = json.loads((out / "findings.json").read_text())
    # the healthy split system was judged, and raised nothing
    assert findings["sp-1"]["stats"]["hours_judged"] > 0
    assert "sp-1" not in events and findings["sp-1"]["events"] == []
    # a condenser losing half its airflow over under a day is found, and the printed findings
    # are the stored events
    assert "condenser_fouling" in events["cr-1"]
    assert [e["code"] for e in findings["cr-1"]["events"]] == events["cr-1"]
    assert "EVENT condenser_fouling" in output


def test_demo_run_again_into_the_same_folder_starts_clean(demo_run):
    out, _ = demo_run
    before, events_before = _stored_counts(out), _stored_events(out)
    (out / "notes.txt").write_text("not the demo's")  # a user's file stays
    result = CliRunner().invoke(main, ["demo", "--out", str(out), "--days", DAYS])
    assert result.exit_code == 0, result.output
    assert _stored_counts(out) == before  # same seed, same data, nothing doubled
    assert _stored_events(out) == events_before
    assert (out / "notes.txt").read_text() == "not the demo's"


def test_demo_refuses_an_out_path_that_is_a_file(tmp_path):
    target = tmp_path / "taken"
    target.write_text("a file, not a folder")
    result = CliRunner().invoke(main, ["demo", "--out", str(target)])
    assert result.exit_code != 0 and result.exception is not None
    assert "--out" in result.output and "Traceback" not in result.output
    assert target.read_text() == "a file, not a folder"
