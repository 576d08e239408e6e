"""Tests for rimewatch.physics.virtual_sensors."""

from __future__ import annotations

import compressor_reference as reference
import numpy as np
import pandas as pd
import pytest
from CoolProp.HumidAirProp import HAPropsSI

from rimewatch.physics import refrigerant as props
from rimewatch.physics import virtual_sensors as vs
from rimewatch.physics.compressor import CompressorMap, convex_hull, fit_ahri540
from rimewatch.physics.cycle import cycle_states

KELVIN = 273.15
FLUID = reference.REFRIGERANT


@pytest.fixture(scope="module")
def compressor_map():
    s, d = reference.datasheet_grid()
    mass_flow, power = reference.performance(s + KELVIN, d + KELVIN)
    return CompressorMap.from_dict(
        {
            "refrigerant": FLUID,
            "units": {"temperature": "degC", "mass_flow": "kg/s", "power": "W"},
            "rating": {"suction_superheat": reference.RATED_SUPERHEAT},
            "envelope": {"polygon": [list(v) for v in convex_hull(s, d)]},
            "coefficients": {
                "mass_flow": fit_ahri540(s, d, mass_flow).tolist(),
                "power": fit_ahri540(s, d, power).tolist(),
            },
        }
    )


def _operating_points(n, seed=3):
    """Random sound R410A operating points inside the map envelope, as cycle_states inputs."""
    rng = np.random.default_rng(seed)
    t_evap = rng.uniform(-10.0, 8.0, n) + KELVIN
    t_cond = rng.uniform(30.0, 52.0, n) + KELVIN
    p_s = props.saturation_pressure(FLUID, t_evap, "dew")
    p_d = props.saturation_pressure(FLUID, t_cond, "dew")
    superheat = rng.uniform(3.0, 20.0, n)
    subcooling = rng.uniform(1.0, 10.0, n)
    t_liquid = props.saturation_temperature(FLUID, p_d, "bubble") - subcooling
    t_discharge = t_cond + rng.uniform(20.0, 40.0, n)
    return p_s, p_d, t_evap + superheat, t_liquid, t_discharge


def test_refrigerant_side_balance_closes_per_sample(compressor_map):
    # First law on the whole circuit (ASHRAE Handbook - Fundamentals ch. 2): heat rejected =
    # cooling capacity + compressor power - compressor shell heat loss, per sample.
    p_s, p_d, t_suc, t_liq, t_dis = _operating_points(200)
    states = cycle_states(FLUID, p_s, p_d, t_suc, t_liq, t_dis)
    power = np.random.default_rng(4).uniform(1500.0, 4000.0, len(p_s))
    for cmap in (None, compressor_map):  # energy-balance mass flow, then map mass flow
        out = vs.compute(states, p_s, compressor_map=cmap, compressor_power=power)
        assert (out["flags"] == "").all()
        balance = out["cooling_capacity"] + out["compressor_power"] - out["compressor_heat_loss"]
        np.testing.assert_allclose(out["heat_rejection"], balance, rtol=1e-9)
    # with the energy-balance flow the shell loss is the declared fraction of power
    out = vs.compute(states, p_s, compressor_power=power, shell_loss_fraction=0.08)
    np.testing.assert_allclose(out["compressor_heat_loss"], 0.08 * power, rtol=1e-9)


def test_map_mass_flow_and_power_match_the_physical_compressor(compressor_map):
    # At the rating superheat the density correction is 1, so the map must give the physical
    # compressor's flow (within the 1 % fit tolerance); with 10 K more superheat the corrected
    # map value lies between the uncorrected map and the true (density-proportional) flow.
    t_evap, t_cond = np.array([0.0, 5.0]) + KELVIN, np.array([40.0, 45.0]) + KELVIN
    p_s = props.saturation_pressure(FLUID, t_evap, "dew")
    p_d = props.saturation_pressure(FLUID, t_cond, "dew")
    for extra_superheat in (0.0, 10.0):
        superheat = reference.RATED_SUPERHEAT + extra_superheat
        states = cycle_states(FLUID, p_s, p_d, t_evap + superheat, t_cond - 5.0, t_cond + 30.0)
        out = vs.compute(states, p_s, compressor_map=compressor_map)
        truth, power = reference.performance(t_evap, t_cond, superheat=superheat)
        m_map = compressor_map.mass_flow(t_evap, t_cond)
        if extra_superheat == 0.0:
            np.testing.assert_allclose(out["mass_flow"], truth, rtol=0.01)
            np.testing.assert_allclose(out["compressor_power"], power, rtol=0.01)
        else:
            assert ((truth < out["mass_flow"]) & (out["mass_flow"] < m_map)).all()


def test_volumetric_efficiency_ratio_shows_a_leaking_compressor():
    # Li and Braun (2007): energy-balance flow / map flow falls below 1 when the compressor pumps
    # less than its map. A compressor pumping 80 % of its map flow and still drawing the mapped
    # power heats the gas more (h2 higher); the energy balance sees the smaller flow.
    h1, w, f = 425e3, 3000.0, 0.05
    m_map = 0.060
    m_true = 0.8 * m_map
    h2 = h1 + (1 - f) * w / m_true
    m_balance = vs.energy_balance_mass_flow(w, h1, h2, f)
    np.testing.assert_allclose(vs.volumetric_efficiency_ratio(m_balance, m_map), 0.8, rtol=1e-12)
    assert np.isnan(vs.energy_balance_mass_flow(w, h1, h1 - 1.0))  # no enthalpy rise


def test_out_of_envelope_samples_are_flagged(compressor_map):
    t_evap = np.array([0.0, 15.0]) + KELVIN  # 15 degC suction dew point: above the envelope
    t_cond = np.array([40.0, 40.0]) + KELVIN
    p_s = props.saturation_pressure(FLUID, t_evap, "dew")
    p_d = props.saturation_pressure(FLUID, t_cond, "dew")
    index = pd.date_range("2025-06-01", periods=2, freq="1min", tz="UTC")
    states = cycle_states(
        FLUID,
        pd.Series(p_s, index=index),
        p_d,
        t_evap + 8.0,
        t_cond - 4.0,
        t_cond + 30.0,
    )
    out = vs.compute(states, p_s, compressor_map=compressor_map)
    assert out.index.equals(index)
    assert out["flags"].iloc[0] == ""
    assert "outside the compressor map envelope" in out["flags"].iloc[1]
    assert np.isfinite(out["mass_flow"].iloc[0]) and np.isnan(out["mass_flow"].iloc[1])


def test_inch_pound_equivalents():
    # 1 ton of refrigeration = 12 000 Btu/h = 3.516 853 kW (NIST SP 811, appendix B.9; the
    # International Table Btu is 1055.055 852 62 J). EER = 3.412 x COP (common practice).
    np.testing.assert_allclose(vs.tons_of_refrigeration(3516.8528), 1.0, rtol=1e-7)
    np.testing.assert_allclose(vs.btu_per_hour(1000.0), 3412.14163, rtol=1e-8)
    np.testing.assert_allclose(vs.energy_efficiency_ratio(10e3, 3e3), 3.412 * 10 / 3, rtol=2e-4)


# ASHRAE Handbook - Fundamentals (2017), ch. 1, Table 2 "Thermodynamic properties of moist air at
# 101.325 kPa" (values from memory): saturated air W_s [kg/kg], h_s [kJ/kg dry air], v_s [m^3/kg].
ASHRAE_SATURATED = {20.0: (0.014758, 57.555, 0.8497), 25.0: (0.020170, 76.506, 0.8717)}


@pytest.mark.parametrize("t_c", sorted(ASHRAE_SATURATED))
def test_moist_air_matches_ashrae_table(t_c):
    w_s, h_s, v_s = ASHRAE_SATURATED[t_c]
    air = vs.MoistAir()
    w = air.humidity_ratio(t_c + KELVIN, 1.0)
    np.testing.assert_allclose(w, w_s, rtol=5e-4)  # table gives 5 significant figures
    np.testing.assert_allclose(air.enthalpy(t_c + KELVIN, w) / 1e3, h_s, rtol=5e-4)
    np.testing.assert_allclose(air.dry_air_volume(t_c + KELVIN, w), v_s, rtol=5e-4)


def test_evaporator_air_capacity_matches_ashrae_table_enthalpies():
    # Saturated air at 25 degC cooled to saturated air at 20 degC (ASHRAE table values above):
    # one kg/s of dry air gives 76.506 - 57.555 = 18.951 kW total. The airflow is 1 kg/s of dry air
    # at the entering state, v = 0.8717 m^3/kg.
    loads = vs.evaporator_air_capacity(25.0 + KELVIN, 1.0, 20.0 + KELVIN, 0.8717, supply_rh=1.0)
    np.testing.assert_allclose(loads["total"].iloc[0], 18951.0, rtol=1e-3)
    # sensible part: moist-air heat capacity (1.006 + 1.86 W_s) kJ/(kg K) x 5 K (ASHRAE ch. 1)
    np.testing.assert_allclose(loads["sensible"].iloc[0], (1006 + 1860 * 0.014758) * 5, rtol=2e-3)
    assert loads["latent"].iloc[0] > 0


def test_sensible_capacity_agrees_with_the_standard_air_rule():
    # 1.08 x cfm x dT[F] Btu/h for standard air (common practice, ASHRAE Handbook - Fundamentals
    # ch. 1: 0.075 lb/ft^3 x 60 min/h x 0.24 Btu/(lb F)); dry coil, 1200 cfm, 80 F -> 60 F.
    cfm, t_in, t_out = 1200.0, 80.0, 60.0
    loads = vs.evaporator_air_capacity(
        (t_in - 32) / 1.8 + KELVIN, 0.2, (t_out - 32) / 1.8 + KELVIN, cfm * 0.0283168466 / 60
    )
    rule = 1.08 * cfm * (t_in - t_out)
    np.testing.assert_allclose(vs.btu_per_hour(loads["sensible"].iloc[0]), rule, rtol=0.03)
    assert abs(loads["latent"].iloc[0]) < 1e-6 * loads["total"].iloc[0]  # dry coil: no latent


def test_wet_coil_assumption_and_measured_supply_humidity():
    air = vs.MoistAir()
    w_return = air.humidity_ratio(26.7 + KELVIN, 0.5)
    # coil leaves 12.8 degC air: below the return dew point (~15.5 degC), so it condenses
    wet = vs.supply_humidity_ratio(air, w_return, 12.8 + KELVIN)
    np.testing.assert_allclose(wet, HAPropsSI("W", "T", 12.8 + KELVIN, "R", 0.95, "P", 101325))
    # a coil leaving 20 degC air is dry: humidity ratio unchanged
    assert vs.supply_humidity_ratio(air, w_return, 20.0 + KELVIN) == w_return
    measured = vs.supply_humidity_ratio(air, w_return, 12.8 + KELVIN, supply_rh=0.9)
    np.testing.assert_allclose(measured, HAPropsSI("W", "T", 12.8 + KELVIN, "R", 0.9, "P", 101325))


def test_tabulated_moist_air_agrees_with_hapropssi():
    rng = np.random.default_rng(11)
    t = rng.uniform(-30.0, 55.0, 2000) + KELVIN
    rh = rng.uniform(0.05, 1.0, 2000)
    exact, table = vs.MoistAir(90e3), vs.MoistAir.tabulated(90e3)
    w = exact.humidity_ratio(t, rh)
    np.testing.assert_allclose(table.humidity_ratio(t, rh), w, rtol=2e-3, atol=1e-6)
    np.testing.assert_allclose(table.enthalpy(t, w), exact.enthalpy(t, w), rtol=0, atol=20.0)
    np.testing.assert_allclose(table.dry_air_volume(t, w), exact.dry_air_volume(t, w), rtol=1e-4)
    # outside the tables (70 degC): computed directly, not extrapolated
    assert table.enthalpy(70.0 + KELVIN, 0.01) == exact.enthalpy(70.0 + KELVIN, 0.01)


def test_virtual_airflows_invert_the_air_side_balance():
    t_r, rh, t_s, flow = 26.7 + KELVIN, 0.5, 12.8 + KELVIN, 0.55
    capacity = vs.evaporator_air_capacity(t_r, rh, t_s, flow)["total"].iloc[0]
    np.testing.assert_allclose(vs.virtual_evaporator_airflow(capacity, t_r, rh, t_s), flow)
    # condenser: 1 m^3/s of 35 degC air warmed 10 K carries about 1.13 kg/s x 1.02 kJ/(kg K) x 10 K
    q = 11.5e3
    airflow = vs.virtual_condenser_airflow(q, 35.0 + KELVIN, 45.0 + KELVIN)
    np.testing.assert_allclose(airflow, 1.0, rtol=0.03)
    assert vs.condenser_air_temperature_rise(45.0 + KELVIN, 35.0 + KELVIN) == pytest.approx(10.0)


def test_air_side_in_compute_uses_readings():
    p_s, p_d, t_suc, t_liq, t_dis = _operating_points(5)
    states = cycle_states(FLUID, p_s, p_d, t_suc, t_liq, t_dis)
    air = vs.AirReadings(
        return_air_temp=26.7 + KELVIN,
        return_air_humidity=0.5,
        supply_air_temp=12.8 + KELVIN,
        outdoor_air_temp=35.0 + KELVIN,
        condenser_leaving_air_temp=np.full(5, 46.0 + KELVIN),
        evaporator_airflow=0.6,
    )
    out = vs.compute(states, p_s, compressor_power=3000.0, air=air)
    np.testing.assert_allclose(out["condenser_air_temp_rise"], 11.0)
    for column in (
        "evaporator_capacity_air",
        "virtual_evaporator_airflow",
        "virtual_condenser_airflow",
    ):
        assert np.isfinite(out[column]).all() and (out[column] > 0).all()


# Charge indicator (Li and Braun 2009): deviation = k_sc dSC - k_sh dSH.
def test_charge_indicator_zero_at_rating_and_directions():
    orifice = vs.ChargeModel("fixed_orifice", 0.04, 6.0, 8.0, k_superheat=0.01)
    assert orifice.deviation(6.0, 8.0) == 0.0
    assert orifice.deviation(3.0, 8.0) < 0  # less subcooling: less liquid held, undercharged
    assert orifice.deviation(6.0, 15.0) < 0  # starved evaporator, higher superheat: undercharged
    assert orifice.deviation(9.0, 5.0) > 0  # more liquid backed up: overcharged
    np.testing.assert_allclose(orifice.deviation(1.0, 18.0), -0.04 * 5 - 0.01 * 10)
    valve = vs.ChargeModel("txv", 0.05, 5.0, 6.0)
    assert valve.deviation(5.0, 12.0) == 0.0  # superheat alone says nothing with a TXV by default
    assert valve.deviation(2.0, 6.0) == pytest.approx(-0.15)


def test_charge_calibration_recovers_coefficients_from_known_charge_levels():
    # Synthetic commissioning test: charge removed in steps, subcooling and superheat respond
    # linearly with measurement noise; least squares must recover the sensitivities.
    rng = np.random.default_rng(5)
    charge = np.repeat([1.0, 0.9, 0.8, 0.7], 50)
    sc = 6.0 + 25.0 * (charge - 1.0) + rng.normal(0, 0.2, charge.size)
    sh = 8.0 - 40.0 * (charge - 1.0) + rng.normal(0, 0.3, charge.size)
    model = vs.calibrate_charge_model(sc, sh, charge, "fixed_orifice", k_superheat=0.005)
    predicted = model.deviation(sc, sh)
    np.testing.assert_allclose(
        [predicted[charge == c].mean() for c in (1.0, 0.8)], [0.0, -0.2], atol=0.01
    )
    assert model.deviation(model.rated_subcooling, model.rated_superheat) == pytest.approx(0.0)
    # one charge level: only the rated values are learned, the sensitivity is given
    single = vs.calibrate_charge_model(sc[:50], sh[:50], 1.0, "txv", k_subcooling=0.04)
    assert single.rated_subcooling == pytest.approx(sc[:50].mean())
    with pytest.raises(ValueError, match="give k_subcooling"):
        vs.calibrate_charge_model(sc[:50], sh[:50], 1.0, "txv")


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"expansion_device": "capillary"}, "expansion_device"),
        ({"k_subcooling": float("nan")}, "k_subcooling: not finite"),
        ({"rated_superheat": "six"}, "rated_superheat: not a number"),
        ({"k_subcooling": -0.1}, "k_subcooling: must be positive"),
    ],
)
def test_bad_charge_models_are_refused_naming_the_field(kwargs, message):
    base = {"expansion_device": "txv", "k_subcooling": 0.04, "rated_subcooling": 5.0}
    with pytest.raises(ValueError, match=message):
        vs.ChargeModel(**{**base, "rated_superheat": 6.0, **kwargs})


def test_moist_air_refuses_impossible_pressure():
    with pytest.raises(ValueError, match="outside 50-120 kPa"):
        vs.MoistAir(101.325)  # kPa given where Pa is expected


def test_air_side_of_long_series_agrees_with_direct_hapropssi():
    # compute() switches to the moist-air tables above 1000 samples. Every air-side column must
    # then agree with the same balances written directly on CoolProp's HAPropsSI (independent of
    # MoistAir): stated bound 0.3 % of the total capacity, 0.1 % on the condenser airflow.
    # Condenser air leaving at 61-63 degC lies past the tables (60 degC): computed directly.
    n, p = 1500, 95e3
    rng = np.random.default_rng(21)
    p_s, p_d, t_suc, t_liq, t_dis = _operating_points(n, seed=22)
    states = cycle_states(FLUID, p_s, p_d, t_suc, t_liq, t_dis)
    t_r, rh_r = rng.uniform(18.0, 35.0, n) + KELVIN, rng.uniform(0.2, 0.9, n)
    t_s, t_in = rng.uniform(8.0, 18.0, n) + KELVIN, rng.uniform(-5.0, 45.0, n) + KELVIN
    t_out = t_in + rng.uniform(5.0, 20.0, n)
    t_out[:20] = rng.uniform(61.0, 63.0, 20) + KELVIN
    t_r[20] = np.nan  # a missing reading gives NaN for that sample only
    air = vs.AirReadings(t_r, rh_r, t_s, None, t_in, t_out, evaporator_airflow=0.6, pressure=p)
    out = vs.compute(states, p_s, compressor_power=3000.0, air=air)

    def props(output, temperature, name, value):
        return HAPropsSI(output, "T", temperature, name, value, "P", p)

    ok = np.isfinite(t_r)
    w_r = props("W", t_r[ok], "R", rh_r[ok])
    w_s = np.fmin(w_r, props("W", t_s[ok], "R", np.full(ok.sum(), 0.95)))  # wet-coil rule
    h_r, h_s = props("H", t_r[ok], "W", w_r), props("H", t_s[ok], "W", w_s)
    h_r_dry = props("H", t_r[ok], "W", w_s)
    dry_air = 0.6 / props("Vda", t_r[ok], "W", w_r)
    total = dry_air * (h_r - h_s)
    bound = 3e-3 * np.abs(total)
    np.testing.assert_array_less(np.abs(out["evaporator_capacity_air"][ok] - total), bound)
    sensible = dry_air * (h_r_dry - h_s)
    np.testing.assert_array_less(
        np.abs(out["evaporator_sensible_capacity_air"][ok] - sensible), bound
    )
    np.testing.assert_array_less(
        np.abs(out["evaporator_latent_capacity_air"][ok] - (total - sensible)), bound
    )
    assert np.isnan(out["evaporator_capacity_air"][~ok]).all()
    assert np.isfinite(out["evaporator_capacity_air"][ok]).all()

    w = props("W", t_in, "R", np.full(n, 0.5))
    rise = props("H", t_out, "W", w) - props("H", t_in, "W", w)
    airflow = out["heat_rejection"] * props("Vda", t_in, "W", w) / rise
    np.testing.assert_allclose(out["virtual_condenser_airflow"], airflow, rtol=1e-3)


def test_air_tables_on_request_agree_with_direct_hapropssi_for_short_series():
    # Below 1000 samples compute() calls HAPropsSI directly unless air_tables=True; the tables
    # must then give the same air side within the bound stated above (0.3 % of the capacity).
    p_s, p_d, t_suc, t_liq, t_dis = _operating_points(40, seed=23)
    states = cycle_states(FLUID, p_s, p_d, t_suc, t_liq, t_dis)
    air = vs.AirReadings(
        return_air_temp=np.linspace(20.0, 30.0, 40) + KELVIN,
        return_air_humidity=0.55,
        supply_air_temp=12.0 + KELVIN,
        outdoor_air_temp=np.linspace(10.0, 40.0, 40) + KELVIN,
        condenser_leaving_air_temp=np.linspace(20.0, 52.0, 40) + KELVIN,
        evaporator_airflow=0.6,
    )
    direct = vs.compute(states, p_s, compressor_power=3000.0, air=air)
    tables = vs.compute(states, p_s, compressor_power=3000.0, air=air, air_tables=True)
    for column in ("evaporator_capacity_air", "virtual_evaporator_airflow"):
        np.testing.assert_allclose(tables[column], direct[column], rtol=3e-3)
    np.testing.assert_allclose(
        tables["virtual_condenser_airflow"], direct["virtual_condenser_airflow"], rtol=1e-3
    )
    assert not np.array_equal(tables["evaporator_capacity_air"], direct["evaporator_capacity_air"])
