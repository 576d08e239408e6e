"""Virtual sensors on a year of one-minute samples, timed beside the cycle engine alone.

One R410A rooftop circuit, 525,600 valid random operating points (evaporating -10 to +8 degC,
condensing 30 to 52 degC). Timed: ``cycle_states`` (the baseline), then ``virtual_sensors.compute``
on its output with everything switched on: compressor map with density correction, measured
power (energy-balance mass flow), charge indicator and the air side (return/supply air,
condenser air). Target: the virtual sensors add less time than the cycle engine's own.

Both sides get the same inputs; property tables (refrigerant and moist air) are loaded before the
timing; the steps alternate over several rounds and the best wall time of each is compared (the
machine may be shared). Best CPU time (process time) is shown beside it.

Run: ``.venv/bin/python benchmarks/virtual_sensors.py [--samples N]``
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from rimewatch.commands.map import build_map
from rimewatch.physics import fast
from rimewatch.physics import virtual_sensors as vs
from rimewatch.physics.cycle import cycle_states

KELVIN = 273.15
FLUID = "R410A"
EXAMPLE_TABLE = Path(__file__).parents[1] / "docs" / "examples" / "compressor-table-r410a.csv"


def operating_points(n: int, seed: int = 1):
    rng = np.random.default_rng(seed)
    t_evap = rng.uniform(-10.0, 8.0, n) + KELVIN
    t_cond = rng.uniform(30.0, 52.0, n) + KELVIN
    # dew-point pressures by inverting the fast saturation curve on a fine grid
    grid_p = np.geomspace(3e5, 4.5e6, 20001)
    grid_t = fast.saturation_temperature(FLUID, grid_p, "dew")
    p_s = np.interp(t_evap, grid_t, grid_p)
    p_d = np.interp(t_cond, grid_t, grid_p)
    t_bubble = fast.saturation_temperature(FLUID, p_d, "bubble")
    suction_temp = fast.saturation_temperature(FLUID, p_s, "dew") + rng.uniform(3.0, 20.0, n)
    liquid_temp = t_bubble - rng.uniform(1.0, 10.0, n)
    discharge_temp = t_cond + rng.uniform(20.0, 40.0, n)
    power = rng.uniform(1500.0, 4000.0, n)
    air = vs.AirReadings(
        return_air_temp=rng.uniform(22.0, 28.0, n) + KELVIN,
        return_air_humidity=rng.uniform(0.3, 0.7, n),
        supply_air_temp=rng.uniform(10.0, 16.0, n) + KELVIN,
        outdoor_air_temp=rng.uniform(20.0, 40.0, n) + KELVIN,
        condenser_leaving_air_temp=rng.uniform(42.0, 55.0, n) + KELVIN,
        evaporator_airflow=0.6,
        pressure=97000.0,
    )
    return (p_s, p_d, suction_temp, liquid_temp, discharge_temp), power, air


def timed_rounds(repeats: int, steps: dict) -> dict:
    """Wall and CPU seconds of each step over ``repeats`` rounds; steps alternate within a round.

    Alternating spreads a shared machine's changing load evenly over the steps being compared.
    """
    times = {label: {"wall": [], "cpu": []} for label in steps}
    for _ in range(repeats):
        for label, step in steps.items():
            wall, cpu = time.perf_counter(), time.process_time()
            step()
            times[label]["cpu"].append(time.process_time() - cpu)
            times[label]["wall"].append(time.perf_counter() - wall)
    return times


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=525_600)
    parser.add_argument("--repeats", type=int, default=7)
    args = parser.parse_args()

    inputs, power, air = operating_points(args.samples)
    compressor_map, *_ = build_map(EXAMPLE_TABLE)
    charge = vs.ChargeModel("txv", 0.04, rated_subcooling=5.0, rated_superheat=8.0)
    states = cycle_states(FLUID, *inputs)  # also loads the refrigerant tables

    def refrigerant_side():
        return vs.compute(
            states, inputs[0], compressor_map, compressor_power=power, charge_model=charge
        )

    def all_sensors():
        return vs.compute(
            states, inputs[0], compressor_map, compressor_power=power, charge_model=charge, air=air
        )

    out = all_sensors()  # builds the moist-air tables for the site pressure, outside the timing
    times = timed_rounds(
        args.repeats,
        {
            "cycle engine alone (cycle_states)": lambda: cycle_states(FLUID, *inputs),
            "virtual sensors, refrigerant side + charge": refrigerant_side,
            "virtual sensors, all (with air side)": all_sensors,
        },
    )
    cycle, refrigerant, full = (min(t["wall"]) for t in times.values())
    cycle_cpu, _, full_cpu = (min(t["cpu"]) for t in times.values())
    n = args.samples
    print(f"{n} samples (a year at one minute = 525600), {FLUID}, {args.repeats} rounds")
    print(
        f"{'step':44s} {'best [s]':>9s} {'median [s]':>11s} {'best CPU [s]':>13s} "
        f"{'samples/s':>11s} {'vs cycle engine':>16s}"
    )
    for (label, t), best in zip(times.items(), (cycle, refrigerant, full), strict=True):
        print(
            f"{label:44s} {best:9.3f} {np.median(t['wall']):11.3f} {min(t['cpu']):13.3f} "
            f"{n / best:11.0f} {best / cycle:15.2f}x"
        )
    sound = (out["flags"] == "").mean()
    print(f"samples with no flags: {sound:.1%}; mean COP {np.nanmean(out['cop']):.2f}")
    ratio = full / cycle
    print(
        f"RESULT samples={n} cycle_s={cycle:.3f} virtual_refrigerant_s={refrigerant:.3f} "
        f"virtual_all_s={full:.3f} virtual_over_cycle={ratio:.2f} "
        f"virtual_over_cycle_cpu={full_cpu / cycle_cpu:.2f} target_met={ratio < 1.0}"
    )


if __name__ == "__main__":
    main()
