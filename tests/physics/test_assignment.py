"""State-point assignment and refrigerant identification (physics/assignment.py).

Units are simulated from CoolProp cycles (commissioning_cases.py) and then mis-wired on purpose;
each fault must be found and the right correction proposed, a correctly wired unit must pass, and
missing evidence must never pass. Standstill saturation is checked against published data.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from commissioning_cases import (
    ATM,
    degf_logged_as_degc,
    gauge_logged_as_absolute,
    swap,
    synthetic_unit,
)

from rimewatch.physics import assignment as asg
from rimewatch.physics import standstill

BAR = {"suction_pressure": "bar", "discharge_pressure": "bar", "liquid_pressure": "bar"}
DEGC = dict.fromkeys(
    ("suction_temp", "discharge_temp", "liquid_temp", "outdoor_air_temp"), "degC"
) | {"return_air_temp": "degC"}
UNITS = BAR | DEGC


@pytest.fixture(scope="module")
def r410a_unit():
    return synthetic_unit("R410A")


def _commission(frame, refrigerant="R410A", units=UNITS):
    return asg.commission_unit(frame, refrigerant, configured_units=units)


def test_correctly_wired_unit_passes(r410a_unit):
    result = _commission(r410a_unit)
    assert result.assignment.best.hypothesis.is_configured
    assert not result.assignment.decisive
    assert result.assignment.configured.score > 0.95
    verdicts = result.assignment.point_verdicts()
    for role in (*asg.REQUIRED_ROLES, "discharge_temp"):
        assert verdicts[role].verdict == "consistent", verdicts[role]
    assert result.refrigerant_check.verdict == "consistent"
    assert result.go, result.blockers


@pytest.mark.parametrize(
    ("a", "b"),
    [("suction_pressure", "discharge_pressure"), ("suction_temp", "liquid_temp")],
)
def test_swapped_sensors_are_found(r410a_unit, a, b):
    result = _commission(swap(r410a_unit, a, b))
    best = result.assignment.best.hypothesis
    assert result.assignment.decisive
    assert best.source(a) == b and best.source(b) == a
    assert best.fixes == ()
    verdicts = result.assignment.point_verdicts()
    assert verdicts[a].verdict == verdicts[b].verdict == "contradicts"
    assert verdicts[a].role == b
    assert not result.go


def test_swapped_discharge_and_suction_temperatures_are_found(r410a_unit):
    result = _commission(swap(r410a_unit, "suction_temp", "discharge_temp"))
    best = result.assignment.best.hypothesis
    assert result.assignment.decisive
    assert best.source("suction_temp") == "discharge_temp"


def test_gauge_logged_as_absolute_is_found(r410a_unit):
    result = _commission(gauge_logged_as_absolute(r410a_unit, "suction_pressure"))
    best = result.assignment.best.hypothesis
    assert result.assignment.decisive
    assert best.fixes == (("suction_pressure", "gauge_logged_as_absolute"),)
    # the evidence: one atmosphere between the pressures at standstill
    spread = result.assignment.configured.result("standstill_pressures_equal")
    assert spread.fraction == 0.0
    assert spread.residual == pytest.approx(ATM, abs=10e3)


def test_gauge_offset_side_found_without_configured_units(r410a_unit):
    # Without units, "discharge and liquid read absolute as gauge" (two changes) also equalises
    # the pressures; the saturation relation at standstill picks the right sensor.
    result = _commission(gauge_logged_as_absolute(r410a_unit, "suction_pressure"), units=None)
    assert result.assignment.best.hypothesis.fixes == (
        ("suction_pressure", "gauge_logged_as_absolute"),
    )


def test_degf_labelled_degc_is_found(r410a_unit):
    result = _commission(degf_logged_as_degc(r410a_unit, "liquid_temp"))
    assert result.assignment.decisive
    assert result.assignment.best.hypothesis.fixes == (("liquid_temp", "degF_labelled_degC"),)
    assert result.assignment.point_verdicts()["liquid_temp"].unit_fix == "degF_labelled_degC"


def test_degf_labelled_degc_on_outdoor_air_is_found(r410a_unit):
    result = _commission(degf_logged_as_degc(r410a_unit, "outdoor_air_temp"))
    assert result.assignment.best.hypothesis.fixes == (("outdoor_air_temp", "degF_labelled_degC"),)


def test_kelvin_labelled_degc_is_found(r410a_unit):
    frame = r410a_unit.copy()
    frame["discharge_temp"] = frame["discharge_temp"] + 273.15  # kelvin numbers read as degC
    result = _commission(frame)
    assert result.assignment.best.hypothesis.fixes == (("discharge_temp", "K_labelled_degC"),)


def test_explanation_names_the_evidence(r410a_unit):
    text = _commission(swap(r410a_unit, "suction_pressure", "discharge_pressure")).assignment
    words = text.explanation()
    assert "discharge_pressure measures suction_pressure" in words
    assert "As configured, discharge pressure at least 1.3 times suction pressure" in words


# --- refrigerant --------------------------------------------------------------------------------

# Saturation pressures at 25 degC (and CO2 at 0 degC) from the NIST Chemistry WebBook,
# fluid properties, saturation tables (from memory; rounded to 4 digits). For these pure fluids
# the bubble and dew pressures coincide. 0.3 K covers the rounding (about 1 % in pressure).
PUBLISHED_SATURATION = [
    ("R134a", 298.15, 0.6654e6),
    ("R22", 298.15, 1.0439e6),
    ("R717", 298.15, 1.0032e6),
    ("R290", 298.15, 0.9521e6),
    ("R600a", 298.15, 0.3506e6),
    ("R744", 273.15, 3.4851e6),
]


@pytest.mark.parametrize(("refrigerant", "temperature", "pressure"), PUBLISHED_SATURATION)
def test_standstill_residual_against_published_saturation(refrigerant, temperature, pressure):
    residual = asg.standstill_saturation_residual(refrigerant, pressure, temperature)
    assert abs(residual) < 0.3


def _standstill_frame(pressure_pa, temperature_k, hours=3):
    index = pd.date_range("2025-01-10", periods=hours * 60, freq="1min", tz="UTC")
    n = len(index)
    return pd.DataFrame(
        {
            "suction_pressure": np.full(n, pressure_pa),
            "discharge_pressure": np.full(n, pressure_pa),
            "suction_temp": np.full(n, temperature_k),
            "liquid_temp": np.full(n, temperature_k),
            "outdoor_air_temp": np.full(n, temperature_k),
            "compressor_status": np.zeros(n),
        },
        index=index,
    )


@pytest.mark.parametrize(("refrigerant", "temperature", "pressure"), PUBLISHED_SATURATION[1:5])
def test_refrigerant_identified_from_published_standstill_data(refrigerant, temperature, pressure):
    # A circuit at rest at 25 degC holding the published saturation pressure: the configured
    # R410A contradicts it, and the published fluid is the suggestion (or among its equivalents).
    frame = _standstill_frame(pressure, temperature)
    check = asg.check_refrigerant(frame, "R410A")
    assert check.verdict == "contradicts"
    assert refrigerant in [check.suggested, *check.equivalents]
    assert check.ranking[0].fits


def test_r134a_and_r1234yf_reported_as_indistinguishable():
    # R1234yf was designed as a near drop-in for R134a: at 25 degC their saturation pressures
    # differ by about 2.5 % (NIST WebBook, from memory: 0.665 vs 0.683 MPa), under 1 K.
    check = asg.check_refrigerant(_standstill_frame(0.6654e6, 298.15), "R134a")
    assert check.verdict == "consistent"
    assert "R1234yf" in check.explanation and "cannot tell them apart" in check.explanation


def test_wrong_refrigerant_identified_on_a_running_unit():
    # An R134a unit configured as R410A: the standstill data name R134a, and the wiring is
    # re-assessed with it and found correct.
    result = _commission(synthetic_unit("R134a", days=1, seed=3), refrigerant="R410A")
    check = result.refrigerant_check
    assert check.verdict == "contradicts"
    assert check.suggested in ("R134a", "R1234yf")
    assert "R134a" in [check.suggested, *check.equivalents]
    assert result.assignment.refrigerant == check.suggested
    assert result.assignment.best.hypothesis.is_configured
    assert not result.go


def test_r404a_and_r507a_fit_equally():
    result = _commission(synthetic_unit("R404A", approach_K=10.0, seed=4), refrigerant="R404A")
    check = result.refrigerant_check
    assert check.verdict == "consistent"
    assert "R507A" in check.equivalents


# --- missing evidence never passes ---------------------------------------------------------------


def test_too_little_data_is_no_go(r410a_unit):
    result = _commission(r410a_unit.iloc[300:310])
    assert not result.go
    assert result.assignment.running_samples < asg.MIN_RUNNING_SAMPLES
    assert any("running checks" in b for b in result.blockers)
    assert any("standstill checks" in b for b in result.blockers)
    assert result.refrigerant_check.verdict == "unchecked"
    verdicts = result.assignment.point_verdicts()
    assert {v.verdict for v in verdicts.values()} == {"unchecked"}


def test_no_standstill_is_no_go():
    frame = synthetic_unit("R410A", running_hours=(0.0, 24.0), seed=5)
    result = _commission(frame)
    assert result.assignment.standstill_samples == 0
    assert result.refrigerant_check.verdict == "unchecked"
    assert "No standstill period" in result.refrigerant_check.explanation
    assert not result.go
    assert any("standstill checks" in b for b in result.blockers)


def test_compressor_that_never_runs_is_no_go():
    frame = synthetic_unit("R410A", running_hours=(0.0, 0.0), seed=6)
    result = _commission(frame)
    assert result.assignment.running_samples == 0
    assert result.state_counts[standstill.RUNNING] == 0
    assert any("running checks" in b for b in result.blockers)
    assert not result.go
    # the standstill side still works: the refrigerant is confirmed
    assert result.refrigerant_check.verdict == "consistent"


def test_operating_state_from_pressures_when_status_missing(r410a_unit):
    frame = r410a_unit.drop(columns="compressor_status")
    result = _commission(swap(frame, "suction_pressure", "discharge_pressure"))
    assert result.assignment.decisive
    assert result.assignment.best.hypothesis.source("suction_pressure") == "discharge_pressure"


# --- hypotheses ----------------------------------------------------------------------------------


def test_hypothesis_cost_counts_cycles():
    three_cycle = asg.Hypothesis(
        (("suction_temp", "liquid_temp"), ("liquid_temp", "discharge_temp"),
         ("discharge_temp", "suction_temp"))
    )  # fmt: skip
    assert three_cycle.cost == 2
    swap_and_fix = asg.Hypothesis(
        (("suction_temp", "liquid_temp"), ("liquid_temp", "suction_temp")),
        (("liquid_temp", "degF_labelled_degC"),),
    )
    assert swap_and_fix.cost == 2


def test_unit_fix_candidates_follow_the_configured_unit():
    assert asg.unit_fix_candidates("suction_pressure", "psig") == ("absolute_logged_as_gauge",)
    assert asg.unit_fix_candidates("suction_pressure", "kPa") == ("gauge_logged_as_absolute",)
    assert set(asg.unit_fix_candidates("liquid_temp", "degC")) == {
        "degF_labelled_degC",
        "K_labelled_degC",
    }
    assert len(asg.unit_fix_candidates("liquid_temp")) == 4


def test_unit_fixes_invert_the_mix_up():
    # 77 degF = 25 degC (definition of the Fahrenheit scale: degF = degC * 9/5 + 32)
    stored = np.array([77.0 + 273.15])
    fixed = asg.UNIT_FIXES["degF_labelled_degC"].correct(stored, ATM)
    assert fixed[0] == pytest.approx(298.15)
    back = asg.UNIT_FIXES["degC_labelled_degF"].correct(fixed, ATM)
    assert back[0] == pytest.approx(stored[0])


def test_enumeration_respects_the_budget():
    roles = ["suction_pressure", "discharge_pressure", "suction_temp", "liquid_temp"]
    options = dict.fromkeys(roles, ()) | {"liquid_temp": ("degF_labelled_degC",)}
    hypotheses = asg.enumerate_hypotheses(roles, options, max_changes=1)
    # configured, the pressure swap, the temperature swap, the unit fix
    assert len(hypotheses) == 4
    assert all(h.cost <= 1 for h in hypotheses)
