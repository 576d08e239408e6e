"""p-h diagrams: files written and readable, dome and cycle drawn where CoolProp puts them."""

import xml.etree.ElementTree as ET

import numpy as np
import pandas as pd
import pytest
from CoolProp.CoolProp import PropsSI
from matplotlib.image import imread

from rimewatch.physics import refrigerant as props
from rimewatch.report.ph_diagram import ph_diagram, save_figure

PSI = 6894.757293168361  # Pa per psi (NIST SP 811)


def _states(fluid, p_suction, p_discharge, t_suction, t_liquid, t_discharge):
    """One cycle's enthalpies from the property layer (state 4 isenthalpic from 3)."""
    h1 = props.enthalpy(fluid, p_suction, t_suction)
    s1 = props.entropy(fluid, p_suction, t_suction)
    _, h2s = props.isentropic_state(fluid, p_discharge, s1)
    h3 = props.enthalpy(fluid, p_discharge, t_liquid)
    row = {
        "h1": h1,
        "h2": props.enthalpy(fluid, p_discharge, t_discharge),
        "h2s": h2s,
        "h3": h3,
        "h4": h3,
        "t_evap": props.saturation_temperature(fluid, p_suction),
        "t_cond": props.saturation_temperature(fluid, p_discharge),
        "cop": (h1 - h3) / (h2s - h1),
        "flags": "",
    }
    return pd.DataFrame([row])


@pytest.fixture(scope="module")
def r410a_cycle():
    # 118 psig / 340 psig, 50 degF suction, 95 degF liquid, 160 degF discharge
    p_suc, p_dis = 118 * PSI + 101325.0, 340 * PSI + 101325.0
    return _states("R410A", p_suc, p_dis, 283.15, 308.15, 344.26), p_suc, p_dis


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
    states = pd.concat(
        [
            _states("R744", 30e5, 90e5, 268.15, 308.15, 380.0),
            _states("R744", 30e5, 60e5, 268.15, 290.15, 340.0),
        ],
        ignore_index=True,
    )
    fig = ph_diagram("R744", states, p_suc, p_dis, labels=["summer", "winter"])
    labels = [ln.get_label() for ln in fig.axes[0].get_lines()]
    assert "summer" in labels and "winter" in labels
    assert fig.axes[0].get_legend() is not None
    assert save_figure(fig, tmp_path / "co2.png").stat().st_size > 10_000
