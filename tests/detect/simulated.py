"""Simulated units for the detection tests (physics-based: rimewatch.sim), cached per process.

Each scenario: 7 fault-free days (the baseline period), then faults from ``ONSET``; the same
seed gives the same weather, so a faulted scenario equals the fault-free one before its onset.
"""

from __future__ import annotations

from datetime import UTC, datetime
from functools import cache

import pandas as pd

from rimewatch.detect.unit import UnitInfo
from rimewatch.sim.equipment import default_unit, size_unit
from rimewatch.sim.faults import FaultSpec
from rimewatch.sim.scenario import Scenario, simulate_unit

START = datetime(2026, 7, 1, tzinfo=UTC)
ONSET = datetime(2026, 7, 8, tzinfo=UTC)
END = datetime(2026, 7, 10, tzinfo=UTC)
DAYS = (END - START).days
CLIMATE = "hot_dry"
SEED = 5


@cache
def sized(kind: str):
    spec = default_unit(kind)
    return spec, size_unit(spec)


def unit_info(kind: str) -> UnitInfo:
    spec, unit = sized(kind)
    return UnitInfo(
        key=kind,
        refrigerant=spec.refrigerant,
        expansion_device=spec.expansion_device,
        kind=spec.kind,
        nominal_capacity_W=spec.nominal_capacity_kW * 1000.0,
        superheat_target_K=spec.design_superheat_K,
        subcooling_target_K=spec.design_subcooling_K,
        compressor_map=unit.compressor_map,
        condenser_airflow_m3_s=spec.condenser_airflow_m3_s,
        evaporator_airflow_m3_s=spec.evaporator_airflow_m3_s,
    )


@cache
def readings(kind: str, faults: tuple = (), seed: int = SEED, days: int = DAYS) -> pd.DataFrame:
    """Simulated readings (SI, one column per role). ``faults``: (code, severity) or
    (code, severity, point, kind) tuples, all with onset ``ONSET``."""
    spec, unit = sized(kind)
    specs = tuple(
        FaultSpec(f[0], f[1], ONSET, point=f[2], kind=f[3])
        if len(f) == 4
        else FaultSpec(f[0], f[1], ONSET)
        for f in faults
    )
    scenario = Scenario(unit=spec, start=START, days=days, climate=CLIMATE, seed=seed, faults=specs)
    frame, _ = simulate_unit(scenario, unit)
    return frame


@cache
def baseline(kind: str):
    from rimewatch.detect.pipeline import fit_unit_baseline

    return fit_unit_baseline(readings(kind), unit_info(kind), START, ONSET)
