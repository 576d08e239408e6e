"""CoolProp on first use only, and the disk caches that let an analysis run without it.

CoolProp takes about 2 s to import; with the refrigerant tables, the critical and triple points
and the moist-air tables cached on disk, analysing a stored unit must not import it at all. Values
read back from a cache file must be bitwise those just computed.
"""

from __future__ import annotations

import os
import pickle
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from rimewatch.physics import SUPPORTED, fast
from rimewatch.physics import refrigerant as exact
from rimewatch.physics import virtual_sensors as vs

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "detect"))
from simulated import END, ONSET, baseline, readings, unit_info


def _python(code: str, cache: Path) -> subprocess.CompletedProcess:
    """Run ``code`` in a fresh interpreter with its own table cache; fails on a non-zero exit."""
    env = {**os.environ, "RIMEWATCH_CACHE_DIR": str(cache)}
    done = subprocess.run(
        [sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=600
    )
    assert done.returncode == 0, done.stderr
    return done


def test_importing_the_analysis_does_not_import_coolprop(tmp_path):
    code = (
        "import sys\n"
        "import rimewatch.detection, rimewatch.physics.virtual_sensors, rimewatch.sim.properties\n"
        "import rimewatch.physics.psychrometrics\n"
        "print('CoolProp' in sys.modules)\n"
    )
    assert _python(code, tmp_path).stdout.strip() == "False"


def test_first_use_of_coolprop_sets_ammonia_to_iir(tmp_path):
    # Whichever accessor comes first, CoolProp's own functions then see ammonia on the IIR
    # reference state: saturated liquid at 0 degC has h = 200 kJ/kg (CoolProp default: ~346).
    code = (
        "from rimewatch.physics.refrigerant import humid_air_function, COOLPROP_VERSION\n"
        "humid_air_function()\n"
        "import CoolProp, CoolProp.CoolProp as CP\n"
        "assert COOLPROP_VERSION == CoolProp.__version__, COOLPROP_VERSION\n"
        "print(CP.PropsSI('H', 'T', 273.15, 'Q', 0, 'Ammonia'))\n"
    )
    assert float(_python(code, tmp_path).stdout) == pytest.approx(200e3, abs=10.0)


def test_critical_and_triple_points_come_back_bitwise_from_the_cache(tmp_path, monkeypatch):
    monkeypatch.setenv("RIMEWATCH_CACHE_DIR", str(tmp_path))
    monkeypatch.setattr(exact, "_cached_constants", exact._cached_constants.__wrapped__)
    fresh = {name: exact._computed_constants(fluid) for name, fluid in SUPPORTED.items()}
    built = exact._cached_constants()  # writes the file
    assert list(tmp_path.glob(f"tables/constants-coolprop{exact.COOLPROP_VERSION}.npz"))
    monkeypatch.setattr(exact, "_computed_constants", lambda fluid: pytest.fail("recomputed"))
    loaded = exact._cached_constants()
    assert loaded == built == fresh
    assert exact.critical_point("R410A") == fresh["R410A"][:2]
    assert exact.triple_point("R744") == fresh["R744"][2:]


def test_moist_air_tables_come_back_bitwise_from_the_cache(tmp_path, monkeypatch):
    monkeypatch.setenv("RIMEWATCH_CACHE_DIR", str(tmp_path))
    built = vs._TabulatedMoistAir(90_000)  # computes and writes the tables
    files = list((tmp_path / "tables").glob("moist-air-*.npz"))
    assert [f.name for f in files] == [
        f"moist-air-90000Pa-coolprop{exact.COOLPROP_VERSION}-layout{built.LAYOUT}.npz"
    ]
    monkeypatch.setattr(
        vs._TabulatedMoistAir, "_computed_tables", lambda self: pytest.fail("recomputed")
    )
    loaded = vs._TabulatedMoistAir(90_000)
    for name in ("_w_table", "_w_cells", "_h_cells", "_h_v_cells"):
        np.testing.assert_array_equal(getattr(loaded, name), getattr(built, name), strict=True)
    t, rh = np.array([250.0, 300.0, 320.0]), np.array([0.1, 0.5, 0.9])
    w = loaded.humidity_ratio(t, rh)
    np.testing.assert_array_equal(w, built.humidity_ratio(t, rh))
    np.testing.assert_array_equal(loaded.enthalpy(t, w), built.enthalpy(t, w))


def test_a_damaged_moist_air_cache_file_is_rebuilt(tmp_path, monkeypatch):
    monkeypatch.setenv("RIMEWATCH_CACHE_DIR", str(tmp_path))
    built = vs._TabulatedMoistAir(95_000)
    (path,) = (tmp_path / "tables").glob("moist-air-95000Pa-*.npz")
    path.write_bytes(path.read_bytes()[:200])  # a cut-off zip file
    rebuilt = vs._TabulatedMoistAir(95_000)
    np.testing.assert_array_equal(rebuilt._h_v_cells, built._h_v_cells, strict=True)
    assert path.stat().st_size > 10_000


def test_damaged_refrigerant_cache_files_are_rebuilt(tmp_path, monkeypatch):
    monkeypatch.setenv("RIMEWATCH_CACHE_DIR", str(tmp_path))
    monkeypatch.setattr(fast, "_tables", {})
    path = fast._cache_file(exact.get_refrigerant("R32"))
    path.parent.mkdir(parents=True)
    path.write_bytes(b"PK\x03\x04" + bytes(100))  # a zip header, then nothing usable
    assert np.isfinite(fast.tables_for("R32").flat["h_dew"]).all()
    monkeypatch.setattr(exact, "_cached_constants", exact._cached_constants.__wrapped__)
    constants = path.parent / f"constants-coolprop{exact.COOLPROP_VERSION}.npz"
    constants.write_bytes(b"not a zip file")
    assert exact._cached_constants()["R32"] == exact._computed_constants(SUPPORTED["R32"])
    assert exact.load_arrays(constants) is not None


@pytest.mark.slow
def test_analysis_with_warm_caches_never_imports_coolprop(tmp_path):
    kind = "rooftop_unit"
    case = tmp_path / "unit.pickle"
    case.write_bytes(pickle.dumps((readings(kind), unit_info(kind), baseline(kind), ONSET, END)))
    code = (
        "import pickle, sys\n"
        "from rimewatch.detect.pipeline import analyze_unit\n"
        f"args = pickle.loads(open({str(case)!r}, 'rb').read())\n"
        "print(analyze_unit(*args).stats['minutes'], 'CoolProp' in sys.modules)\n"
    )
    cache = tmp_path / "cache"
    minutes, imported = _python(code, cache).stdout.split()
    assert imported == "True"  # the cold run built the tables
    assert sorted(f.name.split("-")[0] for f in (cache / "tables").iterdir()) == [
        "R410A",
        "constants",
        "moist",
    ]
    assert _python(code, cache).stdout.split() == [minutes, "False"]


def test_an_unwritable_cache_folder_costs_a_warning_not_the_values(tmp_path):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("a file where the cache folder should be")
    code = (
        "import warnings\n"
        "from rimewatch.physics import fast\n"
        "with warnings.catch_warnings(record=True) as caught:\n"
        "    warnings.simplefilter('always')\n"
        "    t = float(fast.saturation_temperature('R134a', 1e6))\n"
        "print(t, any('property cache not written' in str(w.message) for w in caught))\n"
    )
    t_sat, warned = _python(code, blocker).stdout.split()
    # NIST Webbook (from memory): R134a dew point at 1.0 MPa is 39.4 degC
    assert float(t_sat) - 273.15 == pytest.approx(39.4, abs=0.1)
    assert warned == "True"
