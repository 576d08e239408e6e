"""``rimewatch demo`` runs by itself into a folder and leaves readable, physically sound outputs."""

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from matplotlib.image import imread

from rimewatch.cli import main
from rimewatch.commands.demo import DEMO_UNITS


def test_demo_writes_diagrams_and_cycle_table(tmp_path):
    out = tmp_path / "demo-out"
    result = CliRunner().invoke(main, ["demo", "--out", str(out)])
    assert result.exit_code == 0, result.output
    flat = " ".join(result.output.split())
    assert str(out.resolve()) in flat
    for unit in DEMO_UNITS:
        assert unit.unit_id in result.output
        png = out / f"{unit.unit_id}-ph.png"
        assert imread(png).shape[0] > 300  # a real, decodable PNG
    assert "caution:" in flat and "A3, highly flammable" in flat

    cycles = pd.read_csv(out / "cycles.csv", index_col="unit_id")
    assert list(cycles.index) == [u.unit_id for u in DEMO_UNITS]
    # 128 psig + 1 atm with 1 psi = 6894.757 Pa (NIST SP 811)
    assert cycles.loc["RTU-1", "suction_pressure"] == pytest.approx(128 * 6894.757 + 101325.0)
    # First law per kg (adiabatic compressor, isenthalpic valve): q_cond = q_evap + w
    np.testing.assert_allclose(
        cycles["heat_rejection_effect"],
        cycles["refrigerating_effect"] + cycles["compression_work"],
        rtol=1e-9,
    )
    # Second law: no cycle beats Carnot between its saturation temperatures
    subcritical = cycles["cop_carnot"].notna()
    assert subcritical.sum() == 3
    assert (cycles.loc[subcritical, "cop"] < cycles.loc[subcritical, "cop_carnot"]).all()
    # R744 above its critical pressure (73.77 bar, NIST WebBook) is flagged, the others are sound
    assert "transcritical" in cycles.loc["CR-1", "flags"]
    assert cycles.drop(index="CR-1")["flags"].isna().all()
