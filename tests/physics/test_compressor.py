"""Tests for rimewatch.physics.compressor (AHRI 540 maps, Dabiri-Rice correction, envelopes)."""

from __future__ import annotations

import copy

import compressor_reference as reference
import numpy as np
import pytest
import yaml

from rimewatch.physics import refrigerant as props
from rimewatch.physics.compressor import (
    CompressorMap,
    CompressorMapError,
    Envelope,
    ahri540,
    convex_hull,
    dabiri_rice_factor,
    density_corrected_mass_flow,
    fit_ahri540,
)

KELVIN = 273.15
POUND_KG = 0.45359237  # exact, international yard and pound agreement (1959)


@pytest.fixture(scope="module")
def datasheet():
    """Reference datasheet table, SI: S, D [degC], mass flow [kg/h], power [W]."""
    s, d = reference.datasheet_grid()
    mass_flow, power = reference.performance(s + KELVIN, d + KELVIN)
    return s, d, mass_flow * 3600.0, power


@pytest.fixture(scope="module")
def si_map(datasheet):
    s, d, mass_flow_kg_h, power = datasheet
    return CompressorMap.from_dict(
        {
            "model": "RW-S48 reference scroll (invented)",
            "refrigerant": reference.REFRIGERANT,
            "units": {"temperature": "degC", "mass_flow": "kg/h", "power": "W"},
            "rating": {"suction_superheat": reference.RATED_SUPERHEAT},
            "envelope": {"polygon": [list(v) for v in convex_hull(s, d)]},
            "coefficients": {
                "mass_flow": fit_ahri540(s, d, mass_flow_kg_h).tolist(),
                "power": fit_ahri540(s, d, power).tolist(),
            },
        }
    )


def test_polynomial_term_order():
    # AHRI 540 term order: C8 multiplies D S^2 and C9 multiplies S D^2 (S=2, D=3 -> 12 and 18).
    only = np.eye(10)
    expected = [1, 2, 3, 4, 6, 9, 8, 12, 18, 27]
    got = [ahri540(only[k], 2.0, 3.0) for k in range(10)]
    assert got == expected


def test_fitted_map_reproduces_physical_compressor_within_one_percent(si_map):
    # Independent physics: displacement x clearance volumetric efficiency x CoolProp suction
    # density; power from an isentropic-efficiency curve (tests/physics/compressor_reference.py).
    # Check points are random, off the fitted grid, over the whole envelope.
    rng = np.random.default_rng(540)
    s = rng.uniform(-20.0, 10.0, 400) + KELVIN
    d = rng.uniform(25.0, 60.0, 400) + KELVIN
    inside = si_map.in_envelope(s, d)
    s, d = s[inside], d[inside]
    assert len(s) > 200
    mass_flow, power = reference.performance(s, d)
    np.testing.assert_allclose(si_map.mass_flow(s, d), mass_flow, rtol=0.01)
    np.testing.assert_allclose(si_map.power(s, d), power, rtol=0.01)


def test_inch_pound_and_si_sets_give_the_same_mass_flow(si_map):
    # An IP coefficient set made independently: sample the SI map, convert S, D to degF
    # (F = 1.8 C + 32, exact) and kg/h to lb/h (1 lb = 0.45359237 kg, exact), and solve for the
    # ten coefficients; a cubic through samples of a cubic is exact.
    grid_c = np.linspace(-15.0, 55.0, 6)
    s_c, d_c = (a.ravel() for a in np.meshgrid(grid_c, grid_c))
    m_kg_h = si_map.mass_flow(s_c + KELVIN, d_c + KELVIN, extrapolate=True) * 3600.0
    s_f, d_f = 1.8 * s_c + 32.0, 1.8 * d_c + 32.0
    terms = np.column_stack(
        [np.ones_like(s_f), s_f, d_f, s_f**2, s_f * d_f, d_f**2, s_f**3, d_f * s_f**2,
         s_f * d_f**2, d_f**3]
    )  # fmt: skip
    ip_coefficients = np.linalg.lstsq(terms, m_kg_h / POUND_KG, rcond=None)[0]
    ip_map = CompressorMap.from_dict(
        {
            "refrigerant": "R410A",
            "units": {"temperature": "degF", "mass_flow": "lb/h"},
            "rating": {"suction_superheat": reference.RATED_SUPERHEAT * 1.8},
            "envelope": {"suction": [-4.0, 50.0], "discharge": [77.0, 140.0]},
            "coefficients": {"mass_flow": ip_coefficients.tolist()},
        }
    )
    rng = np.random.default_rng(7)
    s = rng.uniform(-20.0, 10.0, 50) + KELVIN
    d = rng.uniform(25.0, 60.0, 50) + KELVIN
    si = si_map.mass_flow(s, d, extrapolate=True)
    np.testing.assert_allclose(ip_map.mass_flow(s, d, extrapolate=True), si, rtol=1e-9)
    # the library's own exact conversion gives the same coefficients
    converted = si_map.converted("degF", mass_flow="lb/h")
    np.testing.assert_allclose(
        converted.coefficients["mass_flow"][0], ip_coefficients, rtol=1e-7, atol=1e-12
    )
    np.testing.assert_allclose(converted.mass_flow(s, d, extrapolate=True), si, rtol=1e-12)
    # same rating condition: 11 K of superheat is 19.8 F-degrees
    np.testing.assert_allclose(converted.rated_superheat, 19.8)
    np.testing.assert_allclose(
        converted.rated_suction_temperature(280.0), si_map.rated_suction_temperature(280.0)
    )


def test_density_correction_is_one_at_rating_and_follows_suction_density(si_map):
    # Dabiri and Rice (1981): m = [1 + F_v (v_rated / v_actual - 1)] m_map.
    t_s, t_d = 5.0 + KELVIN, 45.0 + KELVIN
    p_s = props.saturation_pressure("R410A", t_s, "dew")
    t_rated = si_map.rated_suction_temperature(t_s)
    rho_rated = props.density("R410A", p_s, t_rated)
    assert dabiri_rice_factor(rho_rated, rho_rated) == 1.0
    m_map = si_map.mass_flow(t_s, t_d)
    # more superheat: lighter suction gas, less mass pumped; less superheat: more
    rho_hot = props.density("R410A", p_s, t_rated + 15.0)
    rho_cool = props.density("R410A", p_s, t_rated - 6.0)
    assert density_corrected_mass_flow(m_map, rho_hot, rho_rated) < m_map
    assert density_corrected_mass_flow(m_map, rho_cool, rho_rated) > m_map
    # F_v = 1 is pure proportionality to density (v_rated / v_actual)
    np.testing.assert_allclose(
        density_corrected_mass_flow(m_map, rho_hot, rho_rated, factor=1.0),
        m_map * rho_hot / rho_rated,
        rtol=1e-15,
    )
    # against the physical compressor, whose flow is proportional to suction density: the
    # correction moves the map value towards the truth without overshooting (F_v < 1)
    truth, _ = reference.performance(t_s, t_d, superheat=reference.RATED_SUPERHEAT + 15.0)
    corrected = density_corrected_mass_flow(m_map, rho_hot, rho_rated)
    assert truth < corrected < m_map


def test_yaml_round_trip(si_map):
    text = yaml.safe_dump({"compressor_map": si_map.to_dict()}, sort_keys=False)
    again = CompressorMap.from_dict(yaml.safe_load(text)["compressor_map"])
    s, d = np.array([270.0, 280.0]), np.array([310.0, 320.0])
    np.testing.assert_array_equal(again.mass_flow(s, d), si_map.mass_flow(s, d))
    np.testing.assert_array_equal(again.power(s, d), si_map.power(s, d))
    assert again.to_dict() == si_map.to_dict()


def test_out_of_envelope_samples_are_flagged_not_extrapolated(si_map):
    # (-20 degC, 60 degC) is the lift the envelope cuts off; 15 degC suction is above its top.
    s = np.array([0.0, -20.0, 15.0, np.nan]) + KELVIN
    d = np.array([40.0, 60.0, 40.0, 40.0]) + KELVIN
    np.testing.assert_array_equal(si_map.in_envelope(s, d), [True, False, False, False])
    m = si_map.mass_flow(s, d)
    assert np.isfinite(m[0]) and np.isnan(m[1:]).all()
    assert np.isfinite(si_map.mass_flow(s[:3], d[:3], extrapolate=True)).all()


def test_envelope_bounds_and_polygon():
    square = Envelope(suction=(-10.0, 10.0), discharge=(30.0, 50.0))
    np.testing.assert_array_equal(
        square.contains([-10.0, 10.0001, 0.0], [30.0, 40.0, 50.1]), [True, False, False]
    )
    triangle = Envelope(polygon=((0.0, 0.0), (10.0, 0.0), (0.0, 10.0)))
    np.testing.assert_array_equal(
        triangle.contains([1.0, 6.0, 5.0, 0.0], [1.0, 6.0, 5.0, 10.0]), [True, False, True, True]
    )


def test_variable_speed_interpolates_linearly_in_speed():
    # Physical compressor: displacement rate proportional to speed, so mass flow is linear in
    # speed and maps fitted at 30 Hz and 60 Hz must reproduce 45 Hz.
    s, d = reference.datasheet_grid()
    sets = []
    for speed in (30.0, 60.0):
        m, _ = reference.performance(s + KELVIN, d + KELVIN, speed=speed)
        sets.append({"speed": speed, "coefficients": {"mass_flow": fit_ahri540(s, d, m).tolist()}})
    cmap = CompressorMap.from_dict(
        {
            "refrigerant": "R410A",
            "units": {"temperature": "degC", "mass_flow": "kg/s", "speed": "Hz"},
            "rating": {"suction_superheat": reference.RATED_SUPERHEAT},
            "envelope": {"polygon": [list(v) for v in convex_hull(s, d)]},
            "speeds": list(reversed(sets)),  # any order; sorted on load
        }
    )
    t_s, t_d = np.full(3, 0.0 + KELVIN), np.full(3, 40.0 + KELVIN)
    speeds = np.array([45.0, 37.5, 70.0])
    truth, _ = reference.performance(t_s[:2], t_d[:2], speed=speeds[:2])
    m = cmap.mass_flow(t_s, t_d, speed=speeds)
    np.testing.assert_allclose(m[:2], truth, rtol=0.005)
    assert np.isnan(m[2])  # above the highest mapped speed: flagged, not extrapolated
    np.testing.assert_array_equal(
        cmap.in_envelope(t_s, t_d, speed=np.array([30.0, 60.0, 70.0])), [True, True, False]
    )
    with pytest.raises(CompressorMapError, match="compressor speed"):
        cmap.mass_flow(t_s, t_d)


GOOD = {
    "refrigerant": "R410A",
    "units": {"temperature": "degF", "mass_flow": "lb/h", "power": "W"},
    "rating": {"return_gas_temp": 65.0},
    "envelope": {"suction": [-10.0, 55.0], "discharge": [80.0, 150.0]},
    "coefficients": {"mass_flow": [1.0] * 10, "power": [2.0] * 10},
}


def _broken(path, value):
    mapping = copy.deepcopy(GOOD)
    *parents, last = path
    target = mapping
    for key in parents:
        target = target[key]
    if value is _DELETE:
        del target[last]
    else:
        target[last] = value
    return mapping


_DELETE = object()


@pytest.mark.parametrize(
    ("path", "value", "message"),
    [
        (("coefficients", "power"), [2.0] * 9, r"compressor_map\.coefficients\.power: expected 10"),
        (("coefficients", "mass_flow", 2), "abc", r"coefficients\.mass_flow\[C3\]: not a number"),
        (("coefficients", "power", 9), float("nan"), r"coefficients\.power\[C10\]: not finite"),
        (("coefficients", "mass_flow"), _DELETE, r"coefficients\.mass_flow: missing"),
        (("units", "mass_flow"), "lbs/hr", r"units\.mass_flow: unknown unit 'lbs/hr'"),
        (("units", "temperature"), "Celsius", r"units\.temperature: unknown unit"),
        (("units", "power"), _DELETE, r"units\.power: missing"),
        (("envelope",), _DELETE, r"compressor_map\.envelope: missing"),
        (("rating",), _DELETE, r"compressor_map\.rating"),
        (("rating",), {"superheat": 20}, r"rating\.superheat: unknown"),
        (("envelope", "suction"), [55.0, -10.0], r"envelope\.suction: min"),
        (("refrigerant",), _DELETE, r"compressor_map\.refrigerant: missing"),
    ],
)
def test_bad_maps_are_refused_naming_the_field(path, value, message):
    with pytest.raises(CompressorMapError, match=message):
        CompressorMap.from_dict(_broken(path, value))


def test_good_map_loads_and_return_gas_rating_is_absolute():
    cmap = CompressorMap.from_dict(GOOD)
    # 65 degF return gas = 291.483 K whatever the suction dew point (AHRI 540 rating basis)
    np.testing.assert_allclose(cmap.rated_suction_temperature([270.0, 280.0]), 291.4833333, 1e-9)


def test_fit_refuses_too_few_or_degenerate_points():
    with pytest.raises(ValueError, match="at least 10 points"):
        fit_ahri540(np.arange(9.0), np.arange(9.0) + 40, np.ones(9))
    s = np.tile(np.arange(-10.0, 15.0, 5.0), 3)
    d = np.repeat([35.0, 45.0, 55.0], 5)  # only three condensing temperatures
    with pytest.raises(ValueError, match="do not determine"):
        fit_ahri540(s, d, np.ones_like(s))
