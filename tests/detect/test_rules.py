"""Day-one rules: the formulas against independent values, each rule on simulated faults."""

from __future__ import annotations

import numpy as np
import pytest
from CoolProp.HumidAirProp import HAPropsSI
from simulated import END, ONSET, readings, unit_info

from rimewatch.detect import rules
from rimewatch.detect.pipeline import analyze_unit, prepare


def test_orifice_target_superheat_chart_formula():
    # Common practice (from memory): 67 F indoor wet bulb and 95 F outdoor -> (201-80-95)/2 = 13 F.
    # The humidity giving 67 F wet bulb at 80 F dry bulb from CoolProp's humid-air functions.
    rh = HAPropsSI("R", "T", 299.82, "B", (67.0 - 32.0) / 1.8 + 273.15, "P", 101325.0)
    target = rules.orifice_target_superheat(299.82, rh, (95.0 - 32.0) / 1.8 + 273.15)
    assert target == pytest.approx(13.0 / 1.8, abs=0.02)
    # hot and dry outdoors leaves little superheat: the chart's 5 F floor
    assert rules.orifice_target_superheat(299.82, 0.2, 318.15) == pytest.approx(5.0 / 1.8)


def _steady_features(kind, faults):
    prepared = prepare(readings(kind, faults), unit_info(kind), ONSET, END)
    return prepared.features[prepared.steady.to_numpy()]


def _rule_deviation(kind, faults, feature):
    deviations, bands = rules.expectations(_steady_features(kind, faults), unit_info(kind))
    return float(np.nanmedian(deviations[feature])), bands[feature]


def test_rules_hold_on_a_sound_unit():
    for feature in ("superheat", "subcooling", "t_cond", "evaporator_air_drop"):
        deviation, band = _rule_deviation("rooftop_unit", (), feature)
        assert abs(deviation) < band, feature


@pytest.mark.parametrize(
    ("faults", "feature", "sign"),
    [
        ((("low_charge", 0.5),), "subcooling", -1),  # short of charge: no liquid backs up
        ((("overcharge", 0.4),), "subcooling", 1),  # liquid floods the condenser
        ((("condenser_fouling", 0.7),), "t_cond", 1),  # approach over ambient grows
        ((("evaporator_airflow_low", 0.6),), "evaporator_air_drop", 1),  # less air, more drop
        ((("expansion_valve_fault", 0.6),), "superheat", 1),  # starved evaporator
    ],
)
def test_each_rule_trips_on_its_simulated_fault(faults, feature, sign):
    deviation, band = _rule_deviation("rooftop_unit", faults, feature)
    assert sign * deviation > band


def test_discharge_limit_rule():
    # 107 degC (225 F) at the discharge line: common practice limit.
    feats = _steady_features("split_system", (("low_charge", 0.5),))
    deviations, _ = rules.expectations(feats, unit_info("split_system"))
    above = feats["discharge_temp"] > rules.DISCHARGE_LIMIT_K
    assert above.any()
    assert (deviations["discharge_temp"][above] > 0).all()
    assert deviations["discharge_temp"][~above].isna().all()


def test_day_one_rules_raise_no_event_on_a_sound_unit():
    for kind in ("rooftop_unit", "split_system"):
        analysis = analyze_unit(readings(kind), unit_info(kind), None, ONSET, END)
        assert analysis.stats["mode"] == "day-one rules"
        assert analysis.events == []


def test_day_one_rules_catch_a_severe_starved_evaporator():
    analysis = analyze_unit(
        readings("rooftop_unit", (("expansion_valve_fault", 0.6),)),
        unit_info("rooftop_unit"),
        None,
        ONSET,
        END,
    )
    codes = {e.code for e in analysis.events}
    assert codes & {"expansion_valve_fault", "liquid_line_restriction"}
