"""Detection quality on simulated units: detection, diagnosis, false alarms, time to detect.

Scenarios (rimewatch.sim, physics-based): five unit configurations (refrigerants R410A, R404A,
R32, R134a; thermostatic, electronic and fixed-orifice expansion; rooftop, split and cold-room
units; four invented climates). Each runs 7 fault-free days (the baseline period the user would
mark) and then 3 days judged:

* fault-free runs (several seeds per configuration): every judged unit-day with an event active
  is a false alarm (refrigerant events, and separately any event including sensor faults);
* faulted runs: each refrigerant fault of design.md at three grades (mild, moderate, severe) as a
  step at the start of day 8: detected when a refrigerant-fault event opens in the 3 days,
  correctly diagnosed when its code is the injected one; time to detect from the onset to the end
  of the hour the event opened, in wall-clock hours and in hours of compressor operation.

Grades are ours, on the simulator's severity scale (see rimewatch.sim.faults); the table shows the
simulator's true capacity and COP loss per grade so they can be judged. A fault whose true
capacity and COP loss both stay under 1 % has no measurable effect (a valve that compensates a
restriction); detection is reported with and without those runs. The commercial units (rooftop
units, the cold room) carry a liquid-pressure point at the expansion device, the split systems do
not (most small units have none). Without it a liquid-line restriction and a blocked expansion
device share one pattern, so the summary gives the diagnosis rate for each group and, besides,
the rate counting either of those two codes as right.

The same runs are judged by the day-one rules (no baseline) as the comparison baseline.

Usage: .venv/bin/python benchmarks/detection_quality.py [--workers 2] [--quick]
"""

from __future__ import annotations

import argparse
import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta

import numpy as np
import pandas as pd

START = datetime(2026, 7, 1, tzinfo=UTC)
ONSET = START + timedelta(days=7)
JUDGED_DAYS = 3
END = ONSET + timedelta(days=JUDGED_DAYS)
FAULT_SEED = 11
FAULT_FREE_SEEDS = (1, 2, 3, 4, 5)

CONFIGS = {
    # name: (kind, refrigerant, expansion device, climate)
    "rtu-R410A-txv": ("rooftop_unit", "R410A", "txv", "hot_dry"),
    "split-R410A-orifice": ("split_system", "R410A", "fixed_orifice", "hot_humid"),
    "coldroom-R404A-txv": ("cold_room_condensing_unit", "R404A", "txv", "mediterranean"),
    "rtu-R32-eev": ("rooftop_unit", "R32", "eev", "mediterranean"),
    "split-R134a-orifice": ("split_system", "R134a", "fixed_orifice", "hot_dry"),
}
#: configurations wired with a liquid-pressure point at the expansion device
LIQUID_PRESSURE_POINT = {"rtu-R410A-txv", "coldroom-R404A-txv", "rtu-R32-eev"}
GRADES = ("mild", "moderate", "severe")
SEVERITY = {  # simulator severity per grade (ours)
    "low_charge": (0.1, 0.2, 0.35),
    "overcharge": (0.1, 0.2, 0.3),
    "condenser_fouling": (0.2, 0.4, 0.6),
    "evaporator_airflow_low": (0.2, 0.35, 0.5),
    "liquid_line_restriction": (0.2, 0.4, 0.6),
    "compressor_valve_leakage": (0.1, 0.2, 0.35),
    "non_condensables": (0.05, 0.1, 0.2),
    "expansion_valve_fault": (0.2, 0.4, 0.6),
}
STARVING = {"liquid_line_restriction", "expansion_valve_fault"}
#: below this true capacity and COP loss [%] a fault has no measurable effect on the unit
MEASURABLE_LOSS_PCT = 1.0


def _unit(config: str):
    from rimewatch.detect.unit import UnitInfo
    from rimewatch.sim.equipment import default_unit, size_unit

    kind, refrigerant, device, _ = CONFIGS[config]
    spec = default_unit(kind, refrigerant=refrigerant, expansion_device=device)
    unit = size_unit(spec)
    info = UnitInfo(
        key=config,
        refrigerant=spec.refrigerant,
        expansion_device=spec.expansion_device,
        kind=kind,
        nominal_capacity_W=spec.nominal_capacity_kW * 1000.0,
        superheat_target_K=spec.design_superheat_K,
        subcooling_target_K=spec.design_subcooling_K,
        compressor_map=unit.compressor_map,
        condenser_airflow_m3_s=spec.condenser_airflow_m3_s,
        evaporator_airflow_m3_s=spec.evaporator_airflow_m3_s,
    )
    return spec, unit, info


@dataclass
class Outcome:
    config: str
    code: str  # "none" for fault-free
    grade: str
    seed: int
    mode: str  # "baseline" or "day-one"
    detected_code: str | None = None
    detected_at: pd.Timestamp | None = None
    ttd_wall_h: float = np.nan
    ttd_operating_h: float = np.nan
    false_days_refrigerant: int = 0
    false_days_any: int = 0
    judged_days: int = 0
    true_capacity_loss_pct: float = np.nan
    true_cop_loss_pct: float = np.nan
    error: str = ""


def _active_days(events, codes=None) -> int:
    days = pd.date_range(ONSET, END, freq="1D", inclusive="left")
    count = 0
    for day in days:
        stop = day + pd.Timedelta("1D")
        if any(
            (codes is None or e.code in codes) and e.start < stop and (e.end is None or e.end > day)
            for e in events
        ):
            count += 1
    return count


def run_scenario(config: str, code: str, grade: str, seed: int) -> list[Outcome]:
    from rimewatch.detect.diagnose import REFRIGERANT_FAULTS
    from rimewatch.detect.pipeline import analyze_unit, fit_unit_baseline
    from rimewatch.sim.faults import FaultSpec
    from rimewatch.sim.scenario import Scenario, simulate_unit

    spec, unit, info = _unit(config)
    climate = CONFIGS[config][3]
    faults = ()
    if code != "none":
        faults = (FaultSpec(code, SEVERITY[code][GRADES.index(grade)], ONSET),)
    scenario = Scenario(
        unit=spec, start=START, days=(END - START).days, climate=climate, seed=seed, faults=faults
    )
    frame, truth = simulate_unit(scenario, unit)
    if config not in LIQUID_PRESSURE_POINT:
        frame = frame.drop(columns=["liquid_pressure"], errors="ignore")
    states = truth.states.loc[ONSET:]
    running = states["compressor_on"] & states["converged"]
    capacity_loss = 100 * (
        1 - states.loc[running, "capacity"] / states.loc[running, "healthy_capacity"]
    )
    cop_loss = 100 * (1 - states.loc[running, "cop"] / states.loc[running, "healthy_cop"])
    outcomes = []
    try:
        baseline = fit_unit_baseline(frame, info, START, ONSET)
    except ValueError as exc:
        baseline, error = None, f"baseline: {exc}"
    else:
        error = ""
    for mode in ("baseline", "day-one"):
        outcome = Outcome(config, code, grade, seed, mode, judged_days=JUDGED_DAYS)
        outcome.true_capacity_loss_pct = (
            float(np.nanmedian(capacity_loss)) if running.any() else np.nan
        )
        outcome.true_cop_loss_pct = float(np.nanmedian(cop_loss)) if running.any() else np.nan
        if mode == "baseline" and baseline is None:
            outcome.error = error
            outcomes.append(outcome)
            continue
        analysis = analyze_unit(frame, info, baseline if mode == "baseline" else None, ONSET, END)
        refrigerant = [e for e in analysis.events if e.code in REFRIGERANT_FAULTS]
        if code == "none":
            outcome.false_days_refrigerant = _active_days(refrigerant)
            outcome.false_days_any = _active_days(analysis.events)
        elif refrigerant:
            first = min(refrigerant, key=lambda e: e.detected)
            outcome.detected_code = first.code
            outcome.detected_at = first.detected
            outcome.ttd_wall_h = (first.detected - pd.Timestamp(ONSET)) / pd.Timedelta("1h")
            on = states["compressor_on"].loc[: first.detected - pd.Timedelta("1min")]
            outcome.ttd_operating_h = float(on.sum()) / 60.0
        outcomes.append(outcome)
    return outcomes


def _jobs(quick: bool):
    configs = list(CONFIGS)[:2] if quick else list(CONFIGS)
    seeds = FAULT_FREE_SEEDS[:2] if quick else FAULT_FREE_SEEDS
    jobs = [(c, "none", "-", s) for c in configs for s in seeds]
    jobs += [(c, code, g, FAULT_SEED) for c in configs for code in SEVERITY for g in GRADES]
    return jobs


def _pct(num, den):
    return 100.0 * num / den if den else float("nan")


def _measurable(o: Outcome) -> bool:
    """The fault changed the unit's capacity or COP by at least MEASURABLE_LOSS_PCT (truth)."""
    losses = [o.true_capacity_loss_pct, o.true_cop_loss_pct]
    return any(np.isfinite(v) and abs(v) >= MEASURABLE_LOSS_PCT for v in losses)


def summarise(outcomes: list[Outcome], mode: str) -> dict:
    rows = [o for o in outcomes if o.mode == mode and not o.error]
    free = [o for o in rows if o.code == "none"]
    judged = sum(o.judged_days for o in free)
    faulted = [o for o in rows if o.code != "none"]
    modsev = [o for o in faulted if o.grade in ("moderate", "severe")]
    detected = [o for o in modsev if o.detected_code]
    measurable = [o for o in modsev if _measurable(o)]
    right = [o for o in modsev if o.detected_code == o.code]
    right_or_pair = [
        o
        for o in modsev
        if o.detected_code == o.code or (o.code in STARVING and o.detected_code in STARVING)
    ]
    ttd = [o.ttd_operating_h for o in faulted if o.detected_code]
    ttd_wall = [o.ttd_wall_h for o in faulted if o.detected_code]
    return {
        "unit_days": judged,
        "false_alarm_pct": _pct(sum(o.false_days_refrigerant for o in free), judged),
        "false_alarm_any_pct": _pct(sum(o.false_days_any for o in free), judged),
        "detect_pct": _pct(len(detected), len(modsev)),
        "detect_measurable_pct": _pct(
            sum(1 for o in measurable if o.detected_code), len(measurable)
        ),
        "no_measurable_effect": len(modsev) - len(measurable),
        "diagnose_pct": _pct(len(right), len(modsev)),
        "diagnose_with_liquid_pressure_pct": _pct(
            sum(1 for o in right if o.config in LIQUID_PRESSURE_POINT),
            sum(1 for o in modsev if o.config in LIQUID_PRESSURE_POINT),
        ),
        "diagnose_without_liquid_pressure_pct": _pct(
            sum(1 for o in right if o.config not in LIQUID_PRESSURE_POINT),
            sum(1 for o in modsev if o.config not in LIQUID_PRESSURE_POINT),
        ),
        "diagnose_pair_pct": _pct(len(right_or_pair), len(modsev)),
        "mild_detect_pct": _pct(
            sum(1 for o in faulted if o.grade == "mild" and o.detected_code),
            sum(1 for o in faulted if o.grade == "mild"),
        ),
        "median_ttd_operating_h": float(np.median(ttd)) if ttd else float("nan"),
        "median_ttd_wall_h": float(np.median(ttd_wall)) if ttd_wall else float("nan"),
        "errors": sum(1 for o in outcomes if o.mode == mode and o.error),
    }


def print_table(outcomes: list[Outcome]) -> None:
    frame = pd.DataFrame([o.__dict__ for o in outcomes if o.code != "none"])
    if frame.empty:
        return
    frame["detected"] = frame["detected_code"].notna()
    frame["correct"] = frame["detected_code"] == frame["code"]
    table = frame.groupby(["code", "grade", "mode"]).agg(
        n=("detected", "size"),
        detected_pct=("detected", lambda s: 100 * s.mean()),
        correct_pct=("correct", lambda s: 100 * s.mean()),
        ttd_operating_h=("ttd_operating_h", "median"),
        ttd_wall_h=("ttd_wall_h", "median"),
        true_capacity_loss_pct=("true_capacity_loss_pct", "median"),
        true_cop_loss_pct=("true_cop_loss_pct", "median"),
    )
    table = table.unstack("mode")
    order = pd.MultiIndex.from_product([list(SEVERITY), list(GRADES)])
    table = table.reindex(order)
    columns = [
        ("n", "baseline"),
        ("true_capacity_loss_pct", "baseline"),
        ("true_cop_loss_pct", "baseline"),
        ("detected_pct", "baseline"),
        ("correct_pct", "baseline"),
        ("ttd_operating_h", "baseline"),
        ("ttd_wall_h", "baseline"),
        ("detected_pct", "day-one"),
        ("correct_pct", "day-one"),
    ]
    shown = table[columns].copy()
    shown.columns = [
        "n", "cap_loss%", "cop_loss%", "det%", "diag%", "ttd_op_h", "ttd_wall_h",
        "day1_det%", "day1_diag%",
    ]  # fmt: skip
    print("\nPer fault and grade (baseline models; day-one rules for comparison):")
    print(shown.round(1).to_string())
    wrong = frame[(frame["mode"] == "baseline") & frame["detected"] & ~frame["correct"]]
    if len(wrong):
        print("\nMisdiagnoses (baseline mode): injected -> named")
        print(wrong.groupby(["code", "detected_code"]).size().to_string())
    missed = frame[(frame["mode"] == "baseline") & ~frame["detected"]]
    if len(missed):
        print("\nMissed (baseline mode): config, code, grade, true capacity / COP loss %")
        for _, row in missed.iterrows():
            print(
                f"  {row['config']:<22} {row['code']:<26} {row['grade']:<9}"
                f"{row['true_capacity_loss_pct']:6.1f} {row['true_cop_loss_pct']:6.1f}"
            )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--quick", action="store_true", help="two configurations, fewer seeds")
    args = parser.parse_args()
    jobs = _jobs(args.quick)
    started = time.perf_counter()
    outcomes: list[Outcome] = []
    with ProcessPoolExecutor(max_workers=args.workers) as pool:
        for result in pool.map(run_scenario, *zip(*jobs, strict=True)):
            outcomes.extend(result)
    elapsed = time.perf_counter() - started
    print(
        f"{len(jobs)} scenarios ({len(CONFIGS if not args.quick else list(CONFIGS)[:2])} unit "
        f"configurations) in {elapsed:.0f} s with {args.workers} workers"
    )
    for o in outcomes:
        if o.error:
            print(f"  not judged: {o.config} {o.code} {o.grade} seed {o.seed} {o.mode}: {o.error}")
    print_table(outcomes)
    summary = {mode: summarise(outcomes, mode) for mode in ("baseline", "day-one")}
    print("\nSummary (moderate and severe faults; false alarms on fault-free unit-days):")
    print(pd.DataFrame(summary).round(2).to_string())
    s, d = summary["baseline"], summary["day-one"]
    print(
        "RESULT "
        f"false_alarm_pct={s['false_alarm_pct']:.2f} "
        f"false_alarm_any_pct={s['false_alarm_any_pct']:.2f} "
        f"unit_days={s['unit_days']} detect_pct={s['detect_pct']:.1f} "
        f"detect_measurable_pct={s['detect_measurable_pct']:.1f} "
        f"no_measurable_effect={s['no_measurable_effect']} "
        f"diagnose_pct={s['diagnose_pct']:.1f} diagnose_pair_pct={s['diagnose_pair_pct']:.1f} "
        f"diagnose_with_liquid_pressure_pct={s['diagnose_with_liquid_pressure_pct']:.1f} "
        f"diagnose_without_liquid_pressure_pct={s['diagnose_without_liquid_pressure_pct']:.1f} "
        f"mild_detect_pct={s['mild_detect_pct']:.1f} "
        f"median_ttd_operating_h={s['median_ttd_operating_h']:.1f} "
        f"median_ttd_wall_h={s['median_ttd_wall_h']:.1f} "
        f"day1_false_alarm_pct={d['false_alarm_pct']:.2f} day1_detect_pct={d['detect_pct']:.1f} "
        f"day1_diagnose_pct={d['diagnose_pct']:.1f} "
        "targets: false_alarm_pct<2 detect_pct>=95 diagnose_pct>=90 median_ttd_operating_h<24"
    )


if __name__ == "__main__":
    main()
