"""Diagnosis: the classifier's probabilities, the shared TXV pattern, and simulated faults."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from simulated import END, ONSET, baseline, readings, unit_info

from rimewatch.detect import diagnose
from rimewatch.detect.diagnose import PATTERNS, REFRIGERANT_FAULTS, classify, sign_probabilities
from rimewatch.detect.pipeline import analyze_unit

DESIGN_FAULT_CODES = (  # design.md "Fault codes", refrigerant side
    "low_charge", "overcharge", "condenser_fouling", "evaporator_airflow_low",
    "liquid_line_restriction", "compressor_valve_leakage", "non_condensables",
    "expansion_valve_fault",
)  # fmt: skip


def test_fault_codes_are_those_of_the_design():
    assert set(REFRIGERANT_FAULTS) == set(DESIGN_FAULT_CODES)
    for device_class in ("valve", "orifice"):
        assert set(PATTERNS[device_class]) == set(DESIGN_FAULT_CODES)


def test_sign_probabilities_follow_the_normal_distribution():
    # Standard normal table: P(|Z| < 3) = 0.9973; P(Z > 0) = 0.5.
    p = sign_probabilities([0.0, 3.0], [3.0, 3.0], [1.0, 1.0])
    assert p["0"][0] == pytest.approx(0.9973, abs=1e-4)
    assert p["+"][1] == pytest.approx(0.5, abs=1e-9)
    for sign in ("+", "-", "0"):
        assert np.all((p[sign] >= 0) & (p[sign] <= 1))
    np.testing.assert_allclose(p["+"] + p["-"] + p["0"], 1.0)


def _hour(values: dict):
    r = pd.Series(values, dtype=float)
    return r, pd.Series(0.8, index=r.index), pd.Series(0.27, index=r.index)


def test_overcharge_and_non_condensables_share_a_pattern_without_decoupled_indicators():
    """On a valve unit the temperatures alone cannot tell them apart (Rossi and Braun 1997's
    features); the liquid temperature against outdoor air can (after Li and Braun 2007)."""
    base = {"t_evap": 0.0, "t_cond": 3.0, "superheat": 0.0, "subcooling": 5.0,
            "discharge_temp": 5.0, "condenser_air_rise": 0.0}  # fmt: skip
    ranking = dict(classify(*_hour(base), "valve")["ranking"])
    assert ranking["overcharge"] == pytest.approx(ranking["non_condensables"], rel=0.05)
    ranking = dict(classify(*_hour({**base, "liquid_approach": -3.0}), "valve")["ranking"])
    assert ranking["overcharge"] > 0.95
    ranking = dict(classify(*_hour({**base, "liquid_approach": 1.5}), "valve")["ranking"])
    assert ranking["non_condensables"] > 0.95


def test_condenser_fouling_separated_by_the_condenser_air_side():
    base = {"t_cond": 5.0, "superheat": 0.0, "discharge_temp": 7.0, "liquid_approach": 5.0}
    result = classify(*_hour({**base, "condenser_air_rise": 4.0}), "valve")
    assert result["ranking"][0][0] == "condenser_fouling"


def test_a_sound_hour_is_normal():
    result = classify(*_hour({"t_evap": 0.1, "t_cond": -0.2, "superheat": 0.1}), "valve")
    assert result["normal"] > 0.9 and result["deviating"] == []


def test_severity_labels():
    assert diagnose.severity_label(0.1) == "mild"  # 3 % lost
    assert diagnose.severity_label(0.3) == "moderate"  # 9 %
    assert diagnose.severity_label(0.8) == "severe"  # 24 %


@pytest.mark.parametrize("kind", ["rooftop_unit", "split_system"])
def test_fault_free_run_raises_no_event(kind):
    analysis = analyze_unit(readings(kind), unit_info(kind), baseline(kind), ONSET, END)
    assert analysis.stats["hours_judged"] >= 10
    assert analysis.events == []


CASES = [
    # (unit kind, fault, severity, acceptable top codes)
    ("rooftop_unit", "low_charge", 0.25, {"low_charge"}),
    ("rooftop_unit", "overcharge", 0.25, {"overcharge"}),
    ("rooftop_unit", "condenser_fouling", 0.4, {"condenser_fouling"}),
    ("rooftop_unit", "evaporator_airflow_low", 0.4, {"evaporator_airflow_low"}),
    ("rooftop_unit", "compressor_valve_leakage", 0.3, {"compressor_valve_leakage"}),
    ("rooftop_unit", "non_condensables", 0.15, {"non_condensables"}),
    ("rooftop_unit", "expansion_valve_fault", 0.5, {"expansion_valve_fault"}),
    ("split_system", "low_charge", 0.2, {"low_charge"}),
    ("split_system", "overcharge", 0.25, {"overcharge"}),
    ("split_system", "evaporator_airflow_low", 0.4, {"evaporator_airflow_low"}),
    # no liquid-pressure point separates these two: either is an honest answer
    ("split_system", "liquid_line_restriction", 0.3,
     {"liquid_line_restriction", "expansion_valve_fault"}),
]  # fmt: skip


@pytest.mark.parametrize(("kind", "code", "severity", "accepted"), CASES)
def test_simulated_fault_gets_the_right_code(kind, code, severity, accepted):
    frame = readings(kind, ((code, severity),))
    analysis = analyze_unit(frame, unit_info(kind), baseline(kind), ONSET, END)
    refrigerant = [e for e in analysis.events if e.code in REFRIGERANT_FAULTS]
    assert len(refrigerant) == 1, [(e.code, e.start) for e in analysis.events]
    event = refrigerant[0]
    assert event.code in accepted
    assert event.start < pd.Timestamp(ONSET) + pd.Timedelta("24h")
    assert 0.5 <= event.confidence <= 1.0
    assert not [e for e in analysis.events if e.code == "sensor_fault"]


def test_impact_of_a_fouled_condenser():
    """Fouling raises head pressure: more power, lower COP (the simulator's truth says ~11 %
    more power, ~14 % lower COP at 40 % airflow lost); the estimate shows the same direction."""
    frame = readings("rooftop_unit", (("condenser_fouling", 0.4),))
    analysis = analyze_unit(frame, unit_info("rooftop_unit"), baseline("rooftop_unit"), ONSET, END)
    (event,) = [e for e in analysis.events if e.code == "condenser_fouling"]
    assert 5.0 < event.impact["extra_power_pct"] < 20.0
    assert event.impact["extra_kwh_per_day"] > 0
    assert event.impact["cost_per_day"] == pytest.approx(
        0.25 * event.impact["extra_kwh_per_day"], abs=0.011
    )


def test_one_sensor_explains_deviations_that_share_it():
    # A drifting suction temperature: superheat and the volumetric-efficiency ratio (built from
    # the suction enthalpy) deviate; the evaporating temperature (suction pressure alone) does not.
    inside = {"t_evap": 0.99, "t_cond": 0.98, "subcooling": 0.97, "discharge_temp": 0.9}
    assert (
        diagnose.suspect_sensor(["superheat", "volumetric_efficiency_ratio"], inside)
        == "suction_temp"
    )
    # the same deviations with the evaporating temperature off too: not one sensor
    assert diagnose.suspect_sensor(["superheat", "t_evap"], {"t_cond": 0.99}) is None
    # a liquid approach alone: the liquid sensor, not the outdoor one (t_cond is normal)
    assert diagnose.suspect_sensor(["liquid_approach"], {"t_cond": 0.99}) == "liquid_temp"
