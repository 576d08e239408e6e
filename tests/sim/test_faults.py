"""Each injected fault moves the measurable features the way published fault studies report.

Sources cited beside each check:
[Kim] Kim, M., Payne, W.V., Domanski, P.A., Yoon, S.H., Hermes, C.J.L. (2009). "Performance of a
      residential heat pump operating in the cooling mode with single faults imposed." Applied
      Thermal Engineering 29: 770-778. doi:10.1016/j.applthermaleng.2008.04.009 (TXV unit)
[BB]  Breuker, M.S., Braun, J.E. (1998). "Common faults and their impacts for rooftop air
      conditioners." HVAC&R Research 4(3): 303-318 (fixed-orifice rooftop unit).
Directions are the ones those papers' tables report as we recall them (from memory), and the ones
the physics implies; magnitudes are not compared.
"""

import numpy as np
import pytest

from rimewatch.sim import model
from rimewatch.sim.equipment import default_unit, size_unit
from rimewatch.sim.faults import REFRIGERANT_FAULTS, FaultError, parse_fault

SEVERITY = 0.3


@pytest.fixture(scope="module")
def txv_unit():
    return size_unit(default_unit("rooftop_unit"))


@pytest.fixture(scope="module")
def orifice_unit():
    return size_unit(default_unit("split_system"))


def _healthy_and_faulted(unit, code, severity=SEVERITY):
    cond = model.rating_conditions(unit).take(np.array([0, 0]))
    attribute, sign = REFRIGERANT_FAULTS[code]
    values = getattr(cond, attribute).copy()
    values[1] += sign * severity
    setattr(cond, attribute, values)
    states, converged, _ = model.solve(unit, cond)
    assert converged.all()
    return {k: v[0] for k, v in states.items() if k != "residual"}, {
        k: v[1] for k, v in states.items() if k != "residual"
    }


def test_low_charge_txv(txv_unit):
    ok, bad = _healthy_and_faulted(txv_unit, "low_charge")
    assert bad["subcooling"] < ok["subcooling"]  # [Kim] subcooling falls with charge
    assert bad["superheat"] > ok["superheat"] + 3  # [Kim] TXV starved: superheat rises
    assert bad["capacity"] < ok["capacity"]  # [Kim] capacity falls


def test_low_charge_orifice(orifice_unit):
    ok, bad = _healthy_and_faulted(orifice_unit, "low_charge", 0.2)
    assert bad["superheat"] > ok["superheat"]  # [BB] superheat up
    assert bad["subcooling"] < ok["subcooling"]  # [BB] subcooling down
    assert bad["t_evap"] < ok["t_evap"]  # [BB] evaporating temperature down
    assert bad["capacity"] < ok["capacity"]


@pytest.mark.parametrize("unit_name", ["txv_unit", "orifice_unit"])
def test_overcharge_raises_subcooling(unit_name, request):
    ok, bad = _healthy_and_faulted(request.getfixturevalue(unit_name), "overcharge", 0.2)
    assert bad["subcooling"] > ok["subcooling"]  # [Kim], [BB] subcooling up
    assert bad["p_discharge"] > ok["p_discharge"]  # [Kim], [BB] condensing pressure up


@pytest.mark.parametrize("unit_name", ["txv_unit", "orifice_unit"])
def test_condenser_fouling(unit_name, request):
    ok, bad = _healthy_and_faulted(request.getfixturevalue(unit_name), "condenser_fouling")
    assert bad["t_cond"] > ok["t_cond"] + 1  # [BB] condensing temperature up
    assert bad["discharge_temp"] > ok["discharge_temp"]  # [BB] discharge temperature up
    assert bad["cop"] < ok["cop"]  # [Kim] COP down


@pytest.mark.parametrize("unit_name", ["txv_unit", "orifice_unit"])
def test_evaporator_airflow_low(unit_name, request):
    ok, bad = _healthy_and_faulted(request.getfixturevalue(unit_name), "evaporator_airflow_low")
    assert bad["t_evap"] < ok["t_evap"] - 1  # [Kim], [BB] evaporating temperature down
    assert bad["capacity"] < ok["capacity"]  # [Kim] capacity down


def test_liquid_line_restriction_orifice(orifice_unit):
    ok, bad = _healthy_and_faulted(orifice_unit, "liquid_line_restriction")
    assert bad["subcooling"] > ok["subcooling"]  # [BB] subcooling up (liquid backs up)
    assert bad["superheat"] > ok["superheat"]  # [BB] superheat up (evaporator starved)


def test_liquid_line_restriction_txv_once_valve_runs_out(txv_unit):
    ok, bad = _healthy_and_faulted(txv_unit, "liquid_line_restriction", 0.45)
    assert bad["subcooling"] > ok["subcooling"]  # [Kim] subcooling up
    assert bad["superheat"] > ok["superheat"]  # [Kim] superheat up once the TXV is wide open


@pytest.mark.parametrize("unit_name", ["txv_unit", "orifice_unit"])
def test_compressor_valve_leakage(unit_name, request):
    ok, bad = _healthy_and_faulted(request.getfixturevalue(unit_name), "compressor_valve_leakage")
    assert bad["mass_flow"] < ok["mass_flow"]  # [Kim], [BB] refrigerant flow down
    assert bad["capacity"] < ok["capacity"]  # [Kim], [BB] capacity down
    assert bad["p_evap"] > ok["p_evap"]  # [BB] suction pressure up
    assert bad["p_discharge"] < ok["p_discharge"]  # [BB] discharge pressure down


@pytest.mark.parametrize("unit_name", ["txv_unit", "orifice_unit"])
def test_non_condensables(unit_name, request):
    ok, bad = _healthy_and_faulted(request.getfixturevalue(unit_name), "non_condensables", 0.1)
    assert bad["p_discharge"] > ok["p_discharge"]  # [Kim] condensing (head) pressure up
    assert bad["power"] > ok["power"]  # [Kim] power up


def test_expansion_valve_stuck_closed_starves(txv_unit):
    ok, bad = _healthy_and_faulted(txv_unit, "expansion_valve_fault", 0.4)
    assert bad["superheat"] > ok["superheat"] + 3  # physics: a valve that cannot open starves
    assert bad["p_evap"] < ok["p_evap"]


def test_bad_fault_text_is_refused():
    with pytest.raises(FaultError, match="unknown fault"):
        parse_fault("frozen_coil:severity=0.2:onset=2026-07-01")
    with pytest.raises(FaultError, match="severity"):
        parse_fault("low_charge:severity=lots:onset=2026-07-01")
    with pytest.raises(FaultError, match="above"):
        parse_fault("low_charge:severity=0.9:onset=2026-07-01")
    fault = parse_fault("low_charge:severity=0.25:onset=2026-07-03:ramp=3d")
    assert (fault.severity, fault.ramp_days, fault.onset.isoformat()) == (
        0.25,
        3.0,
        "2026-07-03T00:00:00+00:00",
    )
