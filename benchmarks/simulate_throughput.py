"""One unit-year of one-minute data on one core, beside a per-minute scipy baseline.

The baseline solves the same four balances minute by minute with ``scipy.optimize.root`` (hybr)
on a sample of running minutes and is extrapolated to all the year's running minutes. Target:
the vectorised year in under 60 s. Run: ``.venv/bin/python benchmarks/simulate_throughput.py``.
"""

import os
import time
from datetime import UTC, datetime

os.environ.setdefault("OMP_NUM_THREADS", "1")

import numpy as np
from scipy.optimize import root

from rimewatch.sim import model
from rimewatch.sim.equipment import default_unit, size_unit
from rimewatch.sim.faults import parse_fault
from rimewatch.sim.scenario import Scenario, simulate_unit

SAMPLE = 200


def main():
    spec = default_unit("rooftop_unit")
    unit = size_unit(spec)
    scenario = Scenario(
        unit=spec,
        start=datetime(2026, 1, 1, tzinfo=UTC),
        days=365,
        climate="hot_humid",
        seed=1,
        faults=(parse_fault("low_charge:severity=0.2:onset=2026-06-01:ramp=30d"),),
    )
    started = time.perf_counter()
    _, truth = simulate_unit(scenario, unit)
    elapsed = time.perf_counter() - started
    states = truth.states
    running = int(states["compressor_on"].sum())

    # baseline: scipy per minute on a sample of the same running minutes (faulted conditions)
    rng = np.random.default_rng(0)
    picks = rng.choice(np.flatnonzero(states["compressor_on"].to_numpy()), SAMPLE, replace=False)
    cond = model.Conditions.healthy(
        states["outdoor_temp"].to_numpy()[picks],
        states["outdoor_w"].to_numpy()[picks],
        states["zone_temp"].to_numpy()[picks],
        states["return_w"].to_numpy()[picks],
    )
    guesses = model.initial_guess(unit, cond)
    solved = 0
    t0 = time.perf_counter()
    for k in range(SAMPLE):
        one = cond.take(np.array([k]))
        result = root(lambda x, one=one: model.evaluate(unit, one, x[None, :])["residual"][0],
                      guesses[k], method="hybr")  # fmt: skip
        solved += bool(result.success)
    per_minute = (time.perf_counter() - t0) / SAMPLE
    # the simulator solves each running minute twice (faulted and fault-free reference)
    baseline_year = per_minute * running * 2

    print(f"{'':34s}{'vectorised':>14s}{'scipy per minute':>20s}")
    print(f"{'minutes simulated':34s}{len(states):>14d}{'':>20s}")
    print(f"{'running minutes (x2 solves)':34s}{running:>14d}{'':>20s}")
    print(
        f"{'wall time, one unit-year [s]':34s}{elapsed:>14.1f}{baseline_year:>20.1f}"
        f"  (baseline: {SAMPLE} minutes timed, {solved} converged, extrapolated)"
    )
    print(f"{'non-converged running minutes':34s}{truth.non_converged_minutes:>14d}")
    print(
        f"RESULT unit_year_s={elapsed:.1f} baseline_scipy_s={baseline_year:.0f} "
        f"speedup={baseline_year / elapsed:.0f} running_minutes={running} "
        f"non_converged={truth.non_converged_minutes} target_s=60 "
        f"met={'yes' if elapsed < 60 else 'no'}"
    )


if __name__ == "__main__":
    main()
