"""Commissioning check speed: the full hypothesis search beside scoring the configuration alone.

A simulated R410A unit (tests/physics/commissioning_cases.py: CoolProp cycles by day, standstill
by night) with its suction and liquid temperatures swapped, DAYS days of one-minute samples. The
baseline, measured in the same run, scores only the configuration (``max_changes=0``); the full
search scores every hypothesis with up to two changes and then checks the refrigerant.

    .venv/bin/python benchmarks/commission.py [DAYS]
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "physics"))

from commissioning_cases import swap, synthetic_unit

from rimewatch.physics.assignment import assign_state_points, commission_unit


def main() -> None:
    days = int(sys.argv[1]) if len(sys.argv) > 1 else 7
    frame = swap(synthetic_unit("R410A", days=days, interval_s=60.0), "suction_temp", "liquid_temp")
    units = {"suction_temp": "degC", "liquid_temp": "degC", "discharge_temp": "degC"}
    start = time.perf_counter()
    baseline = assign_state_points(frame, "R410A", configured_units=units, max_changes=0)
    baseline_s = time.perf_counter() - start
    start = time.perf_counter()
    result = commission_unit(frame, "R410A", configured_units=units)
    full_s = time.perf_counter() - start
    print(f"samples                     {len(frame):>10}")
    print(f"configuration only          {baseline_s:>10.2f} s  ({baseline.hypotheses_tried} hyp.)")
    print(
        f"full search + refrigerant   {full_s:>10.2f} s  "
        f"({result.assignment.hypotheses_tried} hypotheses)"
    )
    print(f"found: {result.assignment.best.hypothesis.describe()}")
    print(
        f"RESULT samples={len(frame)} baseline_s={baseline_s:.2f} full_s={full_s:.2f} "
        f"hypotheses={result.assignment.hypotheses_tried} "
        f"found_swap={result.assignment.best.hypothesis.source('suction_temp') == 'liquid_temp'}"
    )


if __name__ == "__main__":
    main()
