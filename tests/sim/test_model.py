"""The steady-state unit model: design point, energy balance, second law, property tables."""

import numpy as np
import pytest
from CoolProp.HumidAirProp import HAPropsSI

from rimewatch.physics import refrigerant as exact
from rimewatch.sim import model
from rimewatch.sim.equipment import default_unit, size_unit
from rimewatch.sim.properties import refrigerant_tables

KINDS = ("rooftop_unit", "split_system", "cold_room_condensing_unit")


@pytest.fixture(scope="module", params=KINDS)
def unit(request):
    return size_unit(default_unit(request.param))


def _random_conditions(unit, n=200, seed=3):
    rng = np.random.default_rng(seed)
    if unit.spec.kind == "cold_room_condensing_unit":
        t_out, t_ret, rh = rng.uniform(-10, 40, n), rng.uniform(0, 6, n), rng.uniform(0.7, 0.95, n)
    else:
        t_out, t_ret, rh = rng.uniform(18, 45, n), rng.uniform(21, 29, n), rng.uniform(0.3, 0.65, n)
    t_out, t_ret = t_out + 273.15, t_ret + 273.15
    w_out = unit.air.humidity_ratio(t_out, np.full(n, 0.4))
    return model.Conditions.healthy(t_out, w_out, t_ret, unit.air.humidity_ratio(t_ret, rh))


def test_design_point_is_reproduced(unit):
    states, converged, _ = model.solve(unit, model.rating_conditions(unit))
    spec = unit.spec
    assert converged.all()
    assert states["t_evap"][0] - 273.15 == pytest.approx(spec.design_evaporating_C, abs=0.05)
    assert states["t_cond"][0] - 273.15 == pytest.approx(spec.design_condensing_C, abs=0.05)
    assert states["superheat"][0] == pytest.approx(spec.design_superheat_K, abs=0.05)
    assert states["subcooling"][0] == pytest.approx(spec.design_subcooling_K, abs=0.05)
    assert states["capacity"][0] == pytest.approx(spec.nominal_capacity_kW * 1e3, rel=2e-3)


def _humid_enthalpy(t, w, p=101325.0):
    return HAPropsSI("H", "T", t, "W", w, "P", np.full_like(t, p))


def test_energy_balance_closes_at_every_sample(unit):
    # First law over the whole unit, every air-side enthalpy recomputed independently with
    # CoolProp's HAPropsSI: condenser air gain = evaporator air loss + power - shell loss.
    cond = _random_conditions(unit)
    s, converged, _ = model.solve(unit, cond)
    assert converged.mean() > 0.99
    ok = converged
    q_evap_air = s["evaporator_air_mass_flow"][ok] * (
        _humid_enthalpy(cond.return_temp[ok], cond.return_w[ok])
        - _humid_enthalpy(s["supply_temp"][ok], s["supply_w"][ok])
    )
    q_cond_air = s["condenser_air_mass_flow"][ok] * (
        _humid_enthalpy(s["condenser_leaving_air_temp"][ok], cond.outdoor_w[ok])
        - _humid_enthalpy(cond.outdoor_temp[ok], cond.outdoor_w[ok])
    )
    shell_loss = model.SHELL_LOSS_FRACTION * s["power"][ok]
    balance = q_cond_air - (q_evap_air + s["power"][ok] - shell_loss)
    # 0.5 % of the heat rejected: linear interpolation in the simulator's air tables
    assert np.abs(balance / q_cond_air).max() < 5e-3
    # the refrigerant side, with exact CoolProp enthalpies at the sensor states (superheated
    # suction, subcooled liquid), matches the air side of the evaporator within 1 %
    name = unit.spec.refrigerant
    dry = s["superheat"][ok] > 0.5
    wet_liquid = s["subcooling"][ok] > 0.5
    pick = dry & wet_liquid
    h1 = exact.enthalpy(name, s["p_evap"][ok][pick], s["suction_temp"][ok][pick])
    h3 = exact.enthalpy(name, s["p_cond"][ok][pick], s["liquid_temp"][ok][pick])
    q_ref = s["mass_flow"][ok][pick] * (h1 - h3)
    assert pick.sum() > 20
    assert np.abs(q_ref / q_evap_air[pick] - 1).max() < 0.01


def test_cop_below_carnot(unit):
    # Second law: COP <= T_cold / (T_hot - T_cold) between the saturation temperatures, and
    # between the air temperatures whenever the outdoor air is the warmer.
    cond = _random_conditions(unit, seed=5)
    s, converged, _ = model.solve(unit, cond)
    ok = converged
    carnot_saturation = s["t_evap"][ok] / (s["t_discharge_dew"][ok] - s["t_evap"][ok])
    assert (s["cop"][ok] < carnot_saturation).all()
    hot = ok & (cond.outdoor_temp > cond.return_temp + 1.0)
    carnot_air = cond.return_temp[hot] / (cond.outdoor_temp[hot] - cond.return_temp[hot])
    assert hot.sum() > 50
    assert (s["cop"][hot] < carnot_air).all()


def test_refrigerant_tables_match_coolprop():
    # The simulator's linear tables against CoolProp's full equation of state.
    tables = refrigerant_tables("R410A")
    t_dew = np.array([263.37, 281.9, 300.13, 322.61])
    superheat = np.array([3.3, 11.0, 27.7, 45.1])
    h, rho = tables.superheated(t_dew, superheat)
    p = exact.saturation_pressure("R410A", t_dew, "dew")
    assert np.abs(h - exact.enthalpy("R410A", p, t_dew + superheat)).max() < 150.0  # J/kg
    assert np.abs(rho / exact.density("R410A", p, t_dew + superheat) - 1).max() < 3e-3
    assert np.abs(tables.dew_temperature(p) - t_dew).max() < 0.02
