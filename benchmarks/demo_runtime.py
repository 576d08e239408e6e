"""`rimewatch demo` end to end, as a new user runs it, beside the same demo on one core.

Three runs of the command in a fresh process each, into a temporary folder:

1. cold: an empty property-table cache (``RIMEWATCH_CACHE_DIR``), as on a fresh machine;
2. warm: the cache filled by run 1 (every later run);
3. baseline: warm, but the process pinned to one core, so the units run one after the other.

Target: run 1 under 60 s on a two-core machine. Wall time depends on what else the machine runs,
so the load average and the CPU time of each run are printed too.
Run: ``.venv/bin/python benchmarks/demo_runtime.py [--days 28]``.
"""

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

RIMEWATCH = Path(sys.executable).with_name("rimewatch")


def run_demo(out: Path, cache: Path, days: float, one_core: bool) -> tuple[float, float]:
    """(wall, CPU) seconds of one `rimewatch demo` run in a child process."""
    env = {**os.environ, "RIMEWATCH_CACHE_DIR": str(cache)}
    command = [str(RIMEWATCH), "demo", "--out", str(out), "--days", str(days)]
    first_core = min(os.sched_getaffinity(0))
    pin = (lambda: os.sched_setaffinity(0, {first_core})) if one_core else None
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    started = time.perf_counter()
    done = subprocess.run(command, env=env, capture_output=True, text=True, preexec_fn=pin)
    wall = time.perf_counter() - started
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode != 0:
        sys.exit(f"rimewatch demo failed:\n{done.stdout}\n{done.stderr}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--days", type=float, default=28.0)
    days = parser.parse_args().days
    cores = len(os.sched_getaffinity(0))
    print(f"{cores} cores available, load average {os.getloadavg()[0]:.1f}, {days:g} days")
    with tempfile.TemporaryDirectory() as tmp:
        tmp_path = Path(tmp)
        cold = run_demo(tmp_path / "out", tmp_path / "cache", days, one_core=False)
        warm = run_demo(tmp_path / "out", tmp_path / "cache", days, one_core=False)
        single = run_demo(tmp_path / "out", tmp_path / "cache", days, one_core=True)
    for label, (wall, cpu) in (
        ("cold cache", cold),
        ("warm cache", warm),
        ("baseline: warm, one core", single),
    ):
        print(f"{label:<26} wall {wall:6.1f} s   CPU {cpu:6.1f} s")
    print(f"load average after: {os.getloadavg()[0]:.1f}")
    print(
        f"RESULT demo_cold_wall_s={cold[0]:.1f} demo_warm_wall_s={warm[0]:.1f} "
        f"one_core_warm_wall_s={single[0]:.1f} demo_cold_cpu_s={cold[1]:.1f} "
        f"demo_warm_cpu_s={warm[1]:.1f} cores={cores}"
    )


if __name__ == "__main__":
    main()
