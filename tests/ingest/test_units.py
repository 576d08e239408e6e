"""Unit conversion checked against published conversion factors and the standard atmosphere."""

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from rimewatch.ingest import units
from rimewatch.ingest.units import (
    ACCEPTED_UNITS,
    UnitError,
    atmospheric_pressure,
    from_si,
    parse_quantity,
    to_si,
)

# NIST SP 811 (2008), Appendix B.8/B.9: factor to SI, with the digits as printed there.
# "exact" marks factors SP 811 prints in bold (exact by definition).
NIST_SP811 = [
    ("psia", 6.894757e3, 1e-7),  # pound-force per square inch -> Pa
    ("bar", 1.0e5, 1e-15),  # exact
    ("kPa", 1.0e3, 1e-15),
    ("MPa", 1.0e6, 1e-15),
    ("lb/h", 0.45359237 / 3600.0, 1e-15),  # pound (avoirdupois) = 0.45359237 kg, exact
    ("lb/min", 0.45359237 / 60.0, 1e-15),
    ("kg/h", 1.0 / 3600.0, 1e-15),
    ("Btu/h", 2.930711e-1, 1e-6),  # Btu_IT per hour -> W
    ("tons", 3.516853e3, 1e-6),  # ton of refrigeration (12 000 Btu_IT/h) -> W
    ("MBH", 2.930711e2, 1e-6),  # thousand Btu_IT per hour -> W
    ("kW", 1.0e3, 1e-15),
    ("cfm", 4.719474e-4, 1e-6),  # cubic foot per minute -> m^3/s
    ("gpm", 6.309020e-5, 1e-6),  # gallon (U.S.) per minute -> m^3/s
    ("L/s", 1.0e-3, 1e-15),
    ("Btu/lb", 2.326e3, 1e-15),  # Btu_IT per pound -> J/kg, exact
    ("kJ/kg", 1.0e3, 1e-15),
    ("Btu/(lb R)", 4.1868e3, 1e-15),  # Btu_IT/(lb degF) -> J/(kg K), exact
    ("ft", 0.3048, 1e-15),  # exact
    ("delta_degF", 1.0 / 1.8, 1e-15),  # a Fahrenheit degree is 5/9 K by definition
]


@pytest.mark.parametrize(("unit", "factor", "rtol"), NIST_SP811)
def test_conversion_factors_match_nist_sp811(unit, factor, rtol):
    assert to_si(1.0, unit) == pytest.approx(factor, rel=rtol)


@pytest.mark.parametrize(
    ("value", "unit", "kelvin"),
    [
        # NIST SP 811 B.8: T/K = t/degC + 273.15; T/K = (t/degF + 459.67) / 1.8
        (0.0, "degC", 273.15),
        (100.0, "degC", 373.15),
        (32.0, "degF", 273.15),
        (212.0, "degF", 373.15),
        (-40.0, "degF", 233.15),  # -40 degF = -40 degC
        (0.0, "degF", 459.67 / 1.8),
        (300.0, "K", 300.0),
    ],
)
def test_temperature_scales_follow_their_definitions(value, unit, kelvin):
    assert to_si(value, unit) == pytest.approx(kelvin, abs=1e-9)


def test_gauge_pressure_adds_the_atmosphere():
    # 0 gauge is atmospheric; 14.695949 psia = 1 standard atmosphere (101325 Pa, NIST SP 811)
    assert to_si(0.0, "psig") == pytest.approx(101325.0)
    assert to_si(14.695949, "psia") == pytest.approx(101325.0, rel=1e-7)
    assert to_si(118.0, "psig") == pytest.approx(118.0 * 6894.757 + 101325.0, rel=1e-7)
    assert to_si(8.2, "bar(g)") == pytest.approx(8.2e5 + 101325.0)
    assert to_si(500.0, "kPa(g)", atmospheric_pressure=90000.0) == pytest.approx(590000.0)


def test_standard_atmosphere_iso_2533():
    # ISO 2533:1975 table values (from memory): 0 m 101325 Pa, 1000 m 89875 Pa, 2000 m 79495 Pa,
    # 5000 m 54020 Pa; the table rounds to 5 significant figures.
    assert atmospheric_pressure(0.0) == pytest.approx(101325.0, abs=0.01)
    assert atmospheric_pressure(1000.0) == pytest.approx(89875.0, abs=2.0)
    assert atmospheric_pressure(2000.0) == pytest.approx(79495.0, abs=3.0)
    assert atmospheric_pressure(5000.0) == pytest.approx(54020.0, abs=5.0)
    elevations = np.array([0.0, 1000.0, np.nan])
    pressures = atmospheric_pressure(elevations)
    assert pressures.shape == (3,) and np.isnan(pressures[2])


def test_standard_atmosphere_refuses_impossible_elevations():
    with pytest.raises(ValueError, match="standard atmosphere"):
        atmospheric_pressure(20000.0)


def test_gauge_reading_at_elevation_uses_that_atmosphere():
    # A gauge reads relative to its surroundings: at 1000 m the same 100 psig is ~11.4 kPa less
    # absolute pressure than at sea level (101325 - 89875 Pa, ISO 2533).
    p_site = atmospheric_pressure(1000.0)
    difference = to_si(100.0, "psig") - to_si(100.0, "psig", atmospheric_pressure=p_site)
    assert difference == pytest.approx(101325.0 - 89875.0, abs=2.0)


def test_rotational_speed_and_fractions():
    # 60 revolutions per minute = 1 revolution per second (definition of the minute)
    assert to_si(60.0, "rpm") == pytest.approx(1.0)
    assert to_si(50.0, "Hz") == 50.0
    assert to_si(45.0, "%RH") == pytest.approx(0.45)
    assert to_si(80.0, "%") == pytest.approx(0.80)


def test_status_words_and_numbers():
    out = to_si(["on", "OFF", "Running", True, 0, 3.0, "maybe", np.nan], "on/off")
    np.testing.assert_array_equal(out[:6], [1.0, 0.0, 1.0, 1.0, 0.0, 1.0])
    assert np.isnan(out[6]) and np.isnan(out[7])


def test_status_numbers_written_as_text():
    # Trend logs (and `rimewatch simulate`) write binary points as "1.0" / "0.0".
    out = to_si(["1.0", "0.0", " 1 ", "nan", "on-ish"], "on/off")
    np.testing.assert_array_equal(out[:3], [1.0, 0.0, 1.0])
    assert np.isnan(out[3]) and np.isnan(out[4])


def test_arrays_in_arrays_out_and_scalars_stay_scalars():
    readings = np.array([[32.0, 50.0], [95.0, np.nan]])
    out = to_si(readings, "degF")
    assert isinstance(out, np.ndarray) and out.shape == (2, 2) and out.dtype == float
    assert np.isnan(out[1, 1])
    assert isinstance(to_si(32.0, "degF"), float)
    series = pd.Series([118.0, 120.0])
    np.testing.assert_allclose(to_si(series, "psig"), to_si(series.to_numpy(), "psig"))
    assert to_si([1, 2], "bar").tolist() == [1.0e5, 2.0e5]


@pytest.fixture(scope="module")
def pint_registry():
    import pint

    return pint.UnitRegistry()


@pytest.mark.parametrize("unit", [u for u in ACCEPTED_UNITS if u != "on/off"])
def test_cached_linear_map_agrees_with_pint_on_every_unit(unit, pint_registry):
    # pint itself, called per value, is the reference for the cached (scale, offset) shortcut.
    registry = pint_registry
    definition = units._DEFINITIONS[unit]
    target = units._PINT_SI[definition.kind]
    for value in (-12.5, 0.0, 3.0, 250.0):
        expected = registry.Quantity(value, definition.pint_expression).to(target).magnitude
        if definition.gauge:
            expected += 101325.0
        assert to_si(value, unit) == pytest.approx(expected, rel=1e-12, abs=1e-9)


@given(
    value=st.floats(min_value=-1e6, max_value=1e6, allow_nan=False),
    unit=st.sampled_from([u for u in ACCEPTED_UNITS if u != "on/off"]),
)
def test_from_si_inverts_to_si(value, unit):
    assert from_si(to_si(value, unit), unit) == pytest.approx(value, rel=1e-9, abs=1e-6)


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("118 psig", (118.0, "psig")),
        ("118psig", (118.0, "psig")),
        ("8.2 bar(g)", (8.2, "bar(g)")),
        ("8.2 barg", (8.2, "bar(g)")),
        ("-5 degC", (-5.0, "degC")),
        ("50 °F", (50.0, "degF")),
        ("50F", (50.0, "degF")),
        ("2.1 MPa", (2.1, "MPa")),
        ("300 K", (300.0, "K")),
        ("  1.5e3 kPa(g) ", (1500.0, "kPa(g)")),
        ("340 PSIG", (340.0, "psig")),
        ("12 psi(a)", (12.0, "psia")),
        (".5 kW", (0.5, "kW")),
    ],
)
def test_parse_quantity(text, expected):
    assert parse_quantity(text) == expected


def test_parse_quantity_default_unit_and_errors():
    assert parse_quantity("300", default_unit="m") == (300.0, "m")
    with pytest.raises(UnitError, match="no unit"):
        parse_quantity("118")
    with pytest.raises(UnitError, match="cannot read"):
        parse_quantity("psig 118")
    with pytest.raises(UnitError, match="cannot read"):
        parse_quantity("")


def test_parse_quantity_of_a_kind():
    assert parse_quantity("340 psig", kind="pressure") == (340.0, "psig")
    with pytest.raises(UnitError, match=r"'degF' is not a pressure unit; accepted: Pa, kPa"):
        parse_quantity("95 degF", kind="pressure")
    with pytest.raises(UnitError) as caught:
        parse_quantity("95 furlongs", kind="temperature")
    assert "K, degC, degF" in str(caught.value) and "psig" not in str(caught.value)
    with pytest.raises(UnitError, match="ambiguous"):
        parse_quantity("118 psi", kind="pressure")


def test_unknown_unit_is_named_and_accepted_units_listed():
    with pytest.raises(UnitError) as caught:
        to_si(1.0, "furlong/fortnight")
    message = str(caught.value)
    assert "furlong/fortnight" in message
    for unit in ("psig", "kPa(g)", "degF", "kg/s", "on/off"):
        assert unit in message
    assert isinstance(caught.value, ValueError)


def test_plain_psi_is_refused_as_ambiguous():
    # A psi reading differs by one atmosphere (~14.7 psi) between gauge and absolute.
    with pytest.raises(UnitError, match=r"psig.*psia"):
        to_si(118.0, "psi")


def test_non_numeric_readings_raise_value_error():
    with pytest.raises(ValueError, match="numbers"):
        to_si(["12", "abc"], "kPa")


def test_kind_helpers():
    assert units.unit_kind("psig") == "pressure"
    assert units.is_gauge("bar(g)") and not units.is_gauge("bar")
    assert units.temperature_difference_unit("degF") == "delta_degF"
    assert units.temperature_difference_unit("degC") == "K"
    assert set(units.units_of_kind("temperature")) == {"K", "degC", "degF"}
    with pytest.raises(UnitError):
        units.temperature_difference_unit("psig")
    # superheat 10 K shown to an inch-pound user: 18 delta degF (1 K = 1.8 delta degF, SP 811)
    assert from_si(10.0, "delta_degF") == pytest.approx(18.0)
    assert math.isclose(from_si(to_si(340.0, "psig"), "psia"), 340.0 + 14.695949, rel_tol=1e-7)
