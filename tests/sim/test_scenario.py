"""Whole scenarios: reproducibility, thermostat cycling, equalisation, ground truth, sensors."""

from datetime import UTC, datetime

import numpy as np
import pytest

from rimewatch.physics import refrigerant as exact
from rimewatch.sim.equipment import default_unit
from rimewatch.sim.faults import parse_fault
from rimewatch.sim.scenario import Scenario, SensorQuality, simulate_unit

CLEAN = SensorQuality(False, False, 0.0, 0.0, 0.0)


@pytest.fixture(scope="module")
def faulted_run():
    scenario = Scenario(
        days=3,
        seed=11,
        faults=(parse_fault("condenser_fouling:severity=0.4:onset=2026-07-02:ramp=12h"),),
        sensors=CLEAN,
    )
    return simulate_unit(scenario)


def test_same_seed_same_data():
    scenario = Scenario(days=1, seed=4)
    first, _ = simulate_unit(scenario)
    again, _ = simulate_unit(scenario)
    other, _ = simulate_unit(Scenario(days=1, seed=5))
    assert first.equals(again)
    assert not first.equals(other)


def test_thermostat_cycles_and_pressures_equalise(faulted_run):
    readings, truth = faulted_run
    on = readings["compressor_status"].to_numpy() > 0.5
    starts = np.flatnonzero(np.diff(on.astype(int)) == 1)
    assert len(starts) > 10  # the unit cycles
    # Off long enough, suction and discharge pressure meet at the saturation pressure of the
    # coldest surrounding temperature (physics: liquid collects where it is coldest).
    off_run = np.flatnonzero(~on)
    settled = [k for k in off_run if k >= 40 and not on[k - 40 : k + 1].any()]
    assert settled
    k = settled[0]
    states = truth.states.iloc[k]
    coldest = min(states["outdoor_temp"], states["zone_temp"])
    expected = exact.saturation_pressure("R410A", coldest, "dew")
    assert readings["suction_pressure"].iloc[k] == pytest.approx(expected, rel=0.01)
    assert readings["discharge_pressure"].iloc[k] == pytest.approx(expected, rel=0.01)


def test_ground_truth_reports_the_fault_and_its_cost(faulted_run):
    _, truth = faulted_run
    summary = truth.summary()
    assert summary["faults"][0]["code"] == "condenser_fouling"
    first, last = summary["daily"][0], summary["daily"][-1]
    assert first["cop_loss_pct"] == 0.0
    assert last["severity"]["condenser_fouling"] == pytest.approx(0.4)
    assert last["cop_loss_pct"] > 3.0  # fouled condenser costs efficiency [Kim 2009]
    assert summary["non_converged_minutes"] == 0


def test_sensor_faults_and_garbage():
    onset = datetime(2026, 7, 1, 12, tzinfo=UTC)
    scenario = Scenario(
        days=1,
        seed=2,
        faults=(
            parse_fault("sensor_fault:point=suction_temp:kind=stuck", default_onset=onset),
            parse_fault(
                "sensor_fault:point=discharge_pressure:kind=gauge_as_absolute", default_onset=onset
            ),
        ),
        sensors=SensorQuality(True, True, 0.01, 0.0, 0.001),
    )
    readings, _ = simulate_unit(scenario)
    late = readings.index >= onset
    stuck = readings.loc[late, "suction_temp"]
    values = stuck[np.isfinite(stuck) & (np.abs(stuck) < 1000) & (stuck != 0)]
    assert values.nunique() == 1
    assert readings["suction_pressure"].isna().mean() == pytest.approx(0.01, abs=0.006)
    clean, _ = simulate_unit(Scenario(days=1, seed=2, sensors=scenario.sensors))
    gap = (clean["discharge_pressure"] - readings["discharge_pressure"])[late].median()
    assert gap == pytest.approx(101325.0, rel=0.01)


def test_every_kind_runs_and_converges():
    for kind in ("split_system", "cold_room_condensing_unit"):
        _, truth = simulate_unit(Scenario(unit=default_unit(kind), days=1, sensors=CLEAN))
        assert truth.non_converged_minutes == 0
        assert truth.states["compressor_on"].sum() > 30


def test_liquid_pressure_is_read_after_a_liquid_line_restriction():
    # design.md places liquid_pressure before the expansion device, i.e. downstream of a clogged
    # filter-drier: the restriction's pressure drop shows as discharge minus liquid pressure
    # (the liquid-line restriction indicator of Li and Braun, 2007).
    scenario = Scenario(
        days=1,
        seed=3,
        faults=(parse_fault("liquid_line_restriction:severity=0.4:onset=2026-07-01T12:00"),),
        sensors=CLEAN,
    )
    readings, _ = simulate_unit(scenario)
    running = readings["compressor_status"].to_numpy() > 0.5
    drop = (readings["discharge_pressure"] - readings["liquid_pressure"])[running]
    before, after = drop[drop.index.hour < 11], drop[drop.index.hour >= 13]
    assert before.median() == pytest.approx(0.0, abs=1e3)  # Pa: no restriction, no drop
    assert after.median() > 50e3  # Pa: the restriction's drop, measured
