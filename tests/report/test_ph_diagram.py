"""p-h diagrams: files written and readable, dome and cycle drawn where CoolProp puts them."""

import xml.etree.ElementTree as ET

import numpy as np
import pytest
from CoolProp.CoolProp import PropsSI
from matplotlib.image import imread

from rimewatch.physics.cycle import cycle_states
from rimewatch.report.ph_diagram import ph_diagram, save_figure

PSI = 6894.757293168361  # Pa per psi (NIST SP 811)


@pytest.fixture(scope="module")
def r410a_cycle():
    # 118 psig / 340 psig, 50 degF suction, 95 degF liquid, 160 degF discharge
    p_suc, p_dis = 118 * PSI + 101325.0, 340 * PSI + 101325.0
    states = cycle_states(
        "R410A", p_suc, p_dis, suction_temp=283.15, liquid_temp=308.15, discharge_temp=344.26,
        method="exact",
    )  # fmt: skip
    return states, p_suc, p_dis


def _line(fig, label):
    (line,) = [ln for ln in fig.axes[0].get_lines() if ln.get_label() == label]
    return line


@pytest.mark.parametrize(
    ("unit_system", "h_per_unit", "p_per_unit"), [("SI", 1e3, 1e5), ("IP", 2326.0, PSI)]
)
def test_dome_follows_coolprop_saturation_enthalpies(
    r410a_cycle, unit_system, h_per_unit, p_per_unit
):
    states, p_suc, p_dis = r410a_cycle
    fig = ph_diagram("R410A", states, p_suc, p_dis, unit_system=unit_system)
    for label, quality in (("bubble line", 0), ("dew line", 1)):
        line = _line(fig, label)
        pressures = np.asarray(line.get_ydata()) * p_per_unit
        plotted_h = np.asarray(line.get_xdata()) * h_per_unit
        # CoolProp PropsSI saturated enthalpy at each plotted pressure (independent call path)
        expected = PropsSI("H", "P", pressures, "Q", quality, "R410A")
        np.testing.assert_allclose(plotted_h, expected, rtol=1e-6)
        assert pressures.size > 50
    # the dome reaches up to just below the critical point (CoolProp: R410A p_crit ~ 49.0 bar)
    p_crit = PropsSI("Pcrit", "R410A")
    top = np.asarray(_line(fig, "dew line").get_ydata()).max() * p_per_unit
    assert 0.99 * p_crit < top < p_crit


def test_cycle_drawn_in_order_with_ideal_compression_dashed(r410a_cycle):
    states, p_suc, p_dis = r410a_cycle
    fig = ph_diagram("R410A", states, p_suc, p_dis, labels=["RTU-1"])
    row = states.iloc[0]
    loop = _line(fig, "RTU-1")
    expected_h = np.array([row.h1, row.h2, row.h3, row.h3, row.h4, row.h1]) / 1e3
    np.testing.assert_allclose(loop.get_xdata(), expected_h)
    np.testing.assert_allclose(
        loop.get_ydata(), np.array([p_suc, p_dis, p_dis, p_dis, p_suc, p_suc]) / 1e5
    )
    ideal = _line(fig, "_RTU-1 isentropic")
    assert ideal.get_linestyle() == "--"
    np.testing.assert_allclose(ideal.get_xdata(), [row.h1 / 1e3, row.h2s / 1e3])
    title = fig.axes[0].get_title()
    assert "R410A" in title and "COP" in title
    # the axis is logarithmic, as p-h charts are
    assert fig.axes[0].get_yscale() == "log"


def test_png_and_svg_written_and_readable(tmp_path, r410a_cycle):
    states, p_suc, p_dis = r410a_cycle
    fig = ph_diagram("R410A", states, p_suc, p_dis)
    png = save_figure(fig, tmp_path / "cycle.png")
    pixels = imread(png)
    assert pixels.shape[0] > 400 and pixels.shape[1] > 600
    assert pixels[..., :3].std() > 0.05  # not a blank canvas
    svg = save_figure(fig, tmp_path / "sub" / "cycle.svg")
    root = ET.parse(svg).getroot()
    assert root.tag.endswith("svg")
    with pytest.raises(ValueError, match=r"\.png or \.svg"):
        save_figure(fig, tmp_path / "cycle.pdf")


def test_several_cycles_and_transcritical_r744(tmp_path):
    # R744 gas cooler above the critical pressure (73.8 bar, NIST WebBook) and a subcritical one
    p_suc = np.array([30e5, 30e5])
    p_dis = np.array([90e5, 60e5])
    states = cycle_states(
        "R744", p_suc, p_dis, suction_temp=268.15, liquid_temp=np.array([308.15, 290.15]),
        discharge_temp=np.array([380.0, 340.0]), method="exact",
    )  # fmt: skip
    assert "transcritical" in states["flags"][0] and states["flags"][1] == ""
    fig = ph_diagram("R744", states, p_suc, p_dis, labels=["summer", "winter"])
    labels = [ln.get_label() for ln in fig.axes[0].get_lines()]
    assert "summer" in labels and "winter" in labels
    assert fig.axes[0].get_legend() is not None
    assert save_figure(fig, tmp_path / "co2.png").stat().st_size > 10_000


def test_missing_discharge_temperature_draws_the_ideal_compression(tmp_path):
    # without a discharge temperature h2 is NaN: the loop runs 1 -> 2s -> 3 and still saves
    p_suc, p_dis = 3.0e5, 10.0e5
    states = cycle_states("R134a", p_suc, p_dis, suction_temp=275.0, liquid_temp=305.0,
                          method="exact")  # fmt: skip
    fig = ph_diagram("R134a", states, p_suc, p_dis, labels=["no T2"])
    loop = _line(fig, "no T2")
    assert loop.get_xdata()[1] == states["h2s"].iloc[0] / 1e3
    assert save_figure(fig, tmp_path / "no-t2.svg").stat().st_size > 10_000


def test_isotherms_follow_coolprop_enthalpy(r410a_cycle):
    states, p_suc, p_dis = r410a_cycle
    fig = ph_diagram("R410A", states, p_suc, p_dis)
    isotherms = [
        ln for ln in fig.axes[0].get_lines() if (ln.get_gid() or "").startswith("isotherm")
    ]
    assert len(isotherms) >= 3
    for line in isotherms:
        temperature = float(line.get_gid().split()[1])
        p = np.asarray(line.get_ydata()) * 1e5
        h = np.asarray(line.get_xdata()) * 1e3
        # away from saturation, each point is CoolProp's h(p, T) (PropsSI, independent call path)
        p_sat = PropsSI("P", "T", temperature, "Q", 0, "R410A") if temperature < 344.0 else np.inf
        single_phase = np.abs(p / p_sat - 1.0) > 0.02
        expected = PropsSI("H", "P", p[single_phase], "T", temperature, "R410A")
        np.testing.assert_allclose(h[single_phase], expected, rtol=1e-6)
