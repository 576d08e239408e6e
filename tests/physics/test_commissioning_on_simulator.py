"""The commissioning check (physics/assignment.py) on simulated units with deliberate wiring faults.

The units come from the simulator (rimewatch.sim): quasi-steady cycles per minute with thermostat
cycling, start-up transients, off-cycle equalisation, sensor offsets and noise, missing samples and
a few garbage values. Each wiring fault is applied to the simulated readings the way a mislabelled
point list would store them; the check must find it and propose the change that undoes it, pass the
unit as wired, and say NO-GO with the reason when the data cannot prove the wiring.

Physical facts relied on (sources named where they are used): at standstill the pressure settles
at the saturation pressure of the coldest place holding liquid (ASHRAE Handbook - Refrigeration,
ch. 8), and degF = degC x 9/5 + 32 (definition of the Fahrenheit scale). The published saturation
data behind the refrigerant ranking are checked in test_assignment.py (NIST WebBook values).
"""

from __future__ import annotations

from datetime import UTC, datetime

import pytest

from rimewatch.physics import assignment as asg
from rimewatch.physics import standstill
from rimewatch.sim.equipment import default_unit
from rimewatch.sim.scenario import Scenario, simulate_unit

ATM = 101325.0  # Pa, standard atmosphere (ISO 2533); the simulated sites are at sea level
START = datetime(2026, 7, 1, tzinfo=UTC)

# The units `rimewatch simulate` declares in an SI site file (kPa absolute, degC).
SI_UNITS = dict.fromkeys(asg.PRESSURE_ROLES, "kPa") | dict.fromkeys(asg.TEMPERATURE_ROLES, "degC")

UNITS = {
    # name: (kind, refrigerant, expansion device, climate, seed)
    "rooftop_r410a_txv": ("rooftop_unit", "R410A", "txv", "temperate", 1),
    "split_r32_orifice": ("split_system", "R32", "fixed_orifice", "mediterranean", 2),
    "rooftop_r134a_txv": ("rooftop_unit", "R134a", "txv", "temperate", 13),
    "cold_room_r404a": ("cold_room_condensing_unit", "R404A", "txv", "temperate", 4),
    "rooftop_r410a_hot_humid": ("rooftop_unit", "R410A", "txv", "hot_humid", 3),
}


@pytest.fixture(scope="module")
def simulated():
    """Three days of each unit, simulated once for the module: {name: SI readings by role}."""
    frames = {}
    for name, (kind, refrigerant, device, climate, seed) in UNITS.items():
        unit = default_unit(kind, refrigerant=refrigerant, expansion_device=device)
        scenario = Scenario(unit=unit, start=START, days=3, climate=climate, seed=seed)
        frames[name], _ = simulate_unit(scenario)
    return frames


def _refrigerant(name: str) -> str:
    return UNITS[name][1]


def _commission(frame, refrigerant):
    units = {role: unit for role, unit in SI_UNITS.items() if role in frame}
    return asg.commission_unit(frame, refrigerant, configured_units=units, atmospheric_pressure=ATM)


# --- the wiring faults, as a mislabelled point list stores them -----------------------------------


def swapped(frame, a, b):
    """Sensors ``a`` and ``b`` wired to each other's points."""
    out = frame.copy()
    out[a], out[b] = frame[b].to_numpy(), frame[a].to_numpy()
    return out


def gauge_as_absolute(frame, role):
    """A gauge transducer configured as absolute: stored one atmosphere low."""
    out = frame.copy()
    out[role] = frame[role] - ATM
    return out


def degf_as_degc(frame, role):
    """A sensor sending degF numbers configured as degC (degF = degC x 9/5 + 32)."""
    out = frame.copy()
    out[role] = (frame[role] - 273.15) * 1.8 + 32.0 + 273.15
    return out


# --- a correctly wired unit passes ----------------------------------------------------------------


@pytest.mark.parametrize("name", list(UNITS))
def test_correctly_wired_simulated_unit_is_go(simulated, name):
    frame = simulated[name]
    result = _commission(frame, _refrigerant(name))
    assert result.assignment.best.hypothesis.is_configured, result.assignment.explanation()
    assert not result.assignment.decisive
    verdicts = result.assignment.point_verdicts()
    for role in (*asg.REQUIRED_ROLES, "discharge_temp", "outdoor_air_temp"):
        assert verdicts[role].verdict == "consistent", verdicts[role]
    assert result.refrigerant_check.verdict == "consistent", result.refrigerant_check.explanation
    assert result.state_counts[standstill.RUNNING] >= asg.MIN_RUNNING_SAMPLES
    assert result.go, result.blockers


# --- each wiring fault is found and the right correction proposed ---------------------------------

SWAPS = [
    ("suction_pressure", "discharge_pressure"),
    ("suction_temp", "liquid_temp"),  # the liquid-line sensor labelled suction (and vice versa)
]
UNIT_MIX_UPS = [
    (gauge_as_absolute, "suction_pressure", "gauge_logged_as_absolute"),
    (gauge_as_absolute, "discharge_pressure", "gauge_logged_as_absolute"),
    (degf_as_degc, "suction_temp", "degF_labelled_degC"),
    (degf_as_degc, "liquid_temp", "degF_labelled_degC"),
    (degf_as_degc, "outdoor_air_temp", "degF_labelled_degC"),
]


@pytest.mark.parametrize(
    ("name", "a", "b"),
    [
        ("rooftop_r410a_txv", *SWAPS[0]),
        ("rooftop_r410a_txv", *SWAPS[1]),
        ("split_r32_orifice", *SWAPS[0]),
    ],
)
def test_swapped_sensors_found_on_simulated_unit(simulated, name, a, b):
    result = _commission(swapped(simulated[name], a, b), _refrigerant(name))
    assignment = result.assignment
    assert assignment.decisive, assignment.explanation()
    best = assignment.best.hypothesis
    assert best.source(a) == b and best.source(b) == a
    assert best.fixes == ()
    verdicts = assignment.point_verdicts()
    assert verdicts[a].verdict == verdicts[b].verdict == "contradicts"
    assert (verdicts[a].role, verdicts[b].role) == (b, a)
    assert f"the sensor configured as {a} measures {b}" in assignment.explanation()
    assert not result.go


@pytest.mark.parametrize(("fault", "role", "fix"), UNIT_MIX_UPS)
def test_unit_mix_up_found_on_simulated_rooftop(simulated, fault, role, fix):
    result = _commission(fault(simulated["rooftop_r410a_txv"], role), "R410A")
    assignment = result.assignment
    assert assignment.decisive, assignment.explanation()
    assert assignment.best.hypothesis.fixes == ((role, fix),)
    assert assignment.best.hypothesis.cost == 1  # nothing else moved
    verdict = assignment.point_verdicts()[role]
    assert verdict.verdict == "contradicts" and verdict.unit_fix == fix
    assert not result.go
    if fix == "gauge_logged_as_absolute":
        # At standstill every transducer reads the equalised pressure, so the gauge reading
        # stands one atmosphere (101.325 kPa) below the others; the simulated transducers carry
        # offsets of a few kPa (4 kPa standard deviation).
        spread = assignment.configured.result("standstill_pressures_equal")
        assert spread.fraction < 0.1
        assert spread.residual == pytest.approx(ATM, abs=15e3)


def test_unit_mix_up_found_on_simulated_split_system(simulated):
    # one of each kind on the fixed-orifice R32 unit
    frame = gauge_as_absolute(simulated["split_r32_orifice"], "discharge_pressure")
    result = _commission(degf_as_degc(frame, "liquid_temp"), "R32")
    assert result.assignment.decisive
    assert set(result.assignment.best.hypothesis.fixes) == {
        ("discharge_pressure", "gauge_logged_as_absolute"),
        ("liquid_temp", "degF_labelled_degC"),
    }
    assert not result.go


# --- the refrigerant from the simulated standstill data -------------------------------------------

# Pairs whose bubble-point pressures lie within about 1 K of each other near room temperature (NIST
# WebBook saturation tables, from memory: R410A 1.65 MPa / R32 1.69 MPa, R404A 1.25 MPa / R507A
# 1.28 MPa, R134a 0.665 MPa / R1234yf 0.683 MPa at 25 degC): standstill data cannot separate them.
LOOK_ALIKES = {"R410A": "R32", "R32": "R410A", "R404A": "R507A", "R134a": "R1234yf"}


@pytest.mark.parametrize(
    "name", ["rooftop_r410a_txv", "split_r32_orifice", "rooftop_r134a_txv", "cold_room_r404a"]
)
def test_refrigerant_identified_from_simulated_standstill(simulated, name):
    true = _refrigerant(name)
    configured = "R22"  # on none of these units
    check = asg.check_refrigerant(simulated[name], configured)
    assert check.verdict == "contradicts", check.explanation
    named = [check.suggested, *check.equivalents]
    assert true in named
    assert set(named) <= {true, LOOK_ALIKES[true]}
    own = next(fit for fit in check.ranking if fit.designation == true)
    assert own.fits and abs(own.residual) <= 1.0  # the simulated offsets are 0.2 K / 4 kPa


def test_cold_room_standstill_follows_the_coldest_place(simulated):
    # The box (about 0 degC) is much colder than the outdoor air: liquid collects in the box coil
    # and the pressure follows its saturation pressure (ASHRAE Handbook - Refrigeration, ch. 8).
    # Against the median of every temperature the configured R404A would look wrong.
    check = asg.check_refrigerant(simulated["cold_room_r404a"], "R404A")
    assert check.verdict == "consistent", check.explanation
    assert "R507A" in check.equivalents


def test_wrong_refrigerant_in_site_file_is_found(simulated):
    # an R134a rooftop unit declared as R410A
    result = _commission(simulated["rooftop_r134a_txv"], "R410A")
    check = result.refrigerant_check
    assert check.verdict == "contradicts"
    assert check.suggested == "R134a"
    assert result.assignment.refrigerant == "R134a"  # the wiring was re-assessed with it
    assert result.assignment.best.hypothesis.is_configured  # and no sensor is blamed for it
    assert "refrigerant R410A: contradicts" in result.blockers
    assert not result.go


@pytest.mark.parametrize(
    ("name", "declared"), [("cold_room_r404a", "R410A"), ("rooftop_r134a_txv", "R404A")]
)
def test_wrong_refrigerant_does_not_hide_behind_a_unit_fix(simulated, name, declared):
    # Under a wrong saturation curve, calling the outdoor air and liquid-line sensors degF makes
    # the cycle look consistent; the refrigerant that fits the standstill data must win instead,
    # with the wiring as it is.
    result = _commission(simulated[name], declared)
    assert result.refrigerant_check.verdict == "contradicts"
    assert result.refrigerant_check.suggested == _refrigerant(name)
    assert result.assignment.best.hypothesis.is_configured, result.assignment.explanation()
    assert not result.go


def test_look_alike_refrigerant_is_reported_not_proven(simulated):
    # An R32 split system declared as R410A: standstill data cannot tell them apart (documented
    # limit), so the report must say that the nameplate decides.
    check = _commission(simulated["split_r32_orifice"], "R410A").refrigerant_check
    assert check.verdict == "consistent"
    assert "R32" in check.explanation and "nameplate" in check.explanation


# --- missing evidence never passes ---------------------------------------------------------------


def test_too_little_simulated_data_is_no_go(simulated):
    frame = simulated["rooftop_r410a_txv"].iloc[:20]  # the first 20 minutes
    result = _commission(frame, "R410A")
    assert not result.go
    assert any("running checks" in b for b in result.blockers)
    assert any("standstill checks" in b for b in result.blockers)
    assert result.refrigerant_check.verdict == "unchecked"
    assert {v.verdict for v in result.assignment.point_verdicts().values()} == {"unchecked"}


@pytest.fixture(scope="module")
def hot_dry_day():
    unit = default_unit("rooftop_unit")
    scenario = Scenario(unit=unit, start=START, days=1, climate="hot_dry", seed=3)
    return simulate_unit(scenario)[0]


def test_no_standstill_in_simulated_window_is_no_go(hot_dry_day):
    # 05:00 to 15:00 UTC of a hot day: the compressor cycles with pauses under 30 minutes
    frame = hot_dry_day.between_time("05:00", "15:00")
    result = _commission(frame, "R410A")
    assert result.state_counts[standstill.STANDSTILL] == 0
    assert result.assignment.running_samples >= asg.MIN_RUNNING_SAMPLES
    assert result.refrigerant_check.verdict == "unchecked"
    assert "No standstill period" in result.refrigerant_check.explanation
    assert any("standstill checks" in b for b in result.blockers)
    assert not result.go


def test_compressor_never_runs_in_simulated_window_is_no_go(simulated):
    # 20:00 to 04:00 UTC of a temperate summer night: the thermostat never calls for cooling
    frame = simulated["rooftop_r410a_txv"].between_time("20:00", "04:00")
    assert frame["compressor_status"].max() == 0.0
    result = _commission(frame, "R410A")
    assert result.state_counts[standstill.RUNNING] == 0
    assert any("running checks" in b for b in result.blockers)
    assert not result.go
    # the standstill side still works: the configured refrigerant is confirmed
    assert result.refrigerant_check.verdict == "consistent"
