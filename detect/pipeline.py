"""One unit's analysis from raw readings to findings and events (pure: frames in, objects out).

Steps: align on the one-minute grid; blank out-of-range values; running (start-up excluded),
standstill and steady samples; per-minute features (cycle, air side, virtual sensors); sensor
checks; residuals (reference models when a baseline exists, the day-one rules otherwise); the
diagnosis; the event lifecycle. :func:`fit_unit_baseline` runs the same first steps and fits the
reference models on the steady samples of a period the user marks fault-free.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from rimewatch.detect import diagnose, events, quality, rules, steady
from rimewatch.detect.features import columns_of, unit_features
from rimewatch.detect.findings import HourlyFindings
from rimewatch.detect.reference import EXTRAPOLATION_WIDENING, Baseline, fit_baseline
from rimewatch.detect.unit import UnitInfo

#: features judged by the diagnosis (residuals); capacity and power only feed the impact figures
RESIDUAL_FEATURES = (
    "t_evap",
    "t_cond",
    "superheat",
    "subcooling",
    "discharge_temp",
    "liquid_approach",
    "evaporator_air_drop",
    "condenser_air_rise",
    "volumetric_efficiency_ratio",
    "condenser_airflow_ratio",
    "evaporator_airflow_ratio",
    "liquid_line_drop",
)
IMPACT_FEATURES = ("cooling_capacity", "compressor_power")
DEFAULT_TARIFF_PER_KWH = 0.25
#: history before the judged period used for start-up exclusion, steady windows and stuck runs
WARM_UP = pd.Timedelta("3h")


@dataclass
class Prepared:
    """The shared first steps of analysis and baseline fitting."""

    grid: pd.DataFrame
    hours: pd.DatetimeIndex
    running: pd.Series
    features: pd.DataFrame
    steady: pd.Series  # over features.index
    quality: HourlyFindings


@dataclass
class UnitAnalysis:
    """What :func:`analyze_unit` found for one unit."""

    unit: str
    findings: HourlyFindings
    events: list
    stats: dict


def _hour_range(index: pd.DatetimeIndex, since=None, until=None) -> pd.DatetimeIndex:
    first = pd.Timestamp(since).floor("1h") if since is not None else index[0].floor("1h")
    last = pd.Timestamp(until) - pd.Timedelta("1ns") if until is not None else index[-1]
    return pd.date_range(first, last.floor("1h"), freq="1h")


def prepare(frame: pd.DataFrame, unit: UnitInfo, since=None, until=None) -> Prepared:
    """Align, blank, find running/standstill/steady samples, compute features, check sensors.

    Readings up to ``WARM_UP`` before ``since`` serve the start-up exclusion, the steady windows
    and the stuck-sensor runs; only ``[since, until)`` is judged and returned.
    """
    if since is not None:
        frame = frame.loc[pd.Timestamp(since) - WARM_UP :]
    grid = steady.align(frame)  # a sorted index: the periods below are slices
    end = len(grid) if until is None else grid.index.searchsorted(pd.Timestamp(until))
    if end < len(grid):
        grid = grid.iloc[:end]
    first = 0 if since is None else grid.index.searchsorted(pd.Timestamp(since))
    if first == len(grid):
        raise ValueError(f"unit {unit.key}: no readings in the period")
    hours = _hour_range(grid.index[first:], since, until)
    grid, blanked = quality.blank_out_of_range(grid, unit)
    running, still = steady.running_and_standstill(grid)
    features = unit_features(grid, unit, running)
    steady_mask = steady.steady(
        _steady_signals(grid, running, features), pd.Series(True, index=features.index)
    )
    if since is not None:
        keep = features.index.searchsorted(pd.Timestamp(since))
        features, steady_mask = features.iloc[keep:], steady_mask.iloc[keep:]
    checks = quality.check_quality(
        grid, blanked, running, still, unit, hours, features, steady_mask
    )
    return Prepared(grid.iloc[first:], hours, running.iloc[first:], features, steady_mask, checks)


def _steady_signals(grid: pd.DataFrame, running: pd.Series, features: pd.DataFrame) -> pd.DataFrame:
    """The steady test's signals on the running samples (the rows of ``features``): the
    feature where there is one, else the reading."""
    own, read = columns_of(features), columns_of(grid, running.to_numpy(dtype=bool))
    names = [name for name in steady.STEADY_LIMITS_K if name in own or name in read]
    columns = [own[name] if name in own else read[name] for name in names]
    values = np.column_stack(columns) if columns else np.empty((len(features), 0))
    return pd.DataFrame(values, index=features.index, columns=names)


def _clean_steady_rows(prepared: Prepared) -> pd.Series:
    """Steady samples in hours without a sensor finding on a driver or on every point."""
    faulty = quality.faulty_points(prepared.quality)
    hour_of = prepared.features.index.floor("1h")
    blocked = {h for h, points in faulty.items() if points}
    keep = prepared.steady.to_numpy() & ~np.asarray(hour_of.isin(list(blocked)))
    return pd.Series(keep, index=prepared.features.index)


def fit_unit_baseline(frame: pd.DataFrame, unit: UnitInfo, start, end) -> Baseline:
    """Reference models from a period the user marks fault-free (readings in ``frame``)."""
    prepared = prepare(frame, unit, start, end)
    rows = _clean_steady_rows(prepared)
    training = prepared.features.loc[rows.to_numpy()]
    return fit_baseline(unit.key, training, start, end, (*RESIDUAL_FEATURES, *IMPACT_FEATURES))


def _steady_columns(prepared: Prepared) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """(feature -> values of the steady samples, their hour slots in ``prepared.hours``)."""
    steady = prepared.steady.to_numpy(dtype=bool)
    slot = quality.hour_slots(prepared.features.index, prepared.hours)[steady]
    return columns_of(prepared.features, steady), slot


def _residuals(prepared: Prepared, unit: UnitInfo, baseline: Baseline | None):
    columns, slot = _steady_columns(prepared)
    if baseline is None:
        deviations, bands = rules.expectation_arrays(columns, unit)
        sigmas = dict.fromkeys(deviations, rules.RULE_UNCERTAINTY_K)
        return diagnose.hourly_residuals(deviations, slot, bands, sigmas, prepared.hours), None
    residuals, position = baseline.residual_arrays(columns, len(slot))
    bands, sigmas = {}, {}
    for name in RESIDUAL_FEATURES:
        model = baseline.models.get(name)
        if model is not None:
            bands[name], sigmas[name] = diagnose.band_and_sigma(name, model.sigma_hourly)
    judged = {name: residuals[name] for name in RESIDUAL_FEATURES if name in residuals}
    hourly = diagnose.hourly_residuals(
        judged, slot, bands, sigmas, prepared.hours, position == 1, EXTRAPOLATION_WIDENING
    )
    return hourly, _impact_inputs(prepared, columns, slot, residuals, baseline)


def _impact_inputs(prepared, columns, slot, residuals, baseline) -> diagnose.ImpactInputs | None:
    if not all(name in baseline.models and name in residuals for name in IMPACT_FEATURES):
        return None
    capacity, power = (columns[name] for name in IMPACT_FEATURES)
    per_sample = np.array(
        [
            capacity,
            capacity - residuals["cooling_capacity"],
            power,
            power - residuals["compressor_power"],
        ]
    )
    medians, _ = quality.hourly_medians(per_sample, slot, len(prepared.hours))
    days = max(len(prepared.hours) / 24.0, 1.0 / 24.0)
    running_hours = float(prepared.running.sum()) / 60.0 / days
    return diagnose.ImpactInputs(*medians, running_hours)


def _judged_hours(findings: HourlyFindings) -> np.ndarray:
    """Hours with at least one key checked (status not NaN)."""
    judged = np.zeros(len(findings.hours), dtype=bool)
    for column in findings.columns.values():
        judged |= ~np.isnan(column)
    return judged


def analyze_unit(
    frame: pd.DataFrame,
    unit: UnitInfo,
    baseline: Baseline | None = None,
    since=None,
    until=None,
    tariff_per_kWh: float = DEFAULT_TARIFF_PER_KWH,
) -> UnitAnalysis:
    """Findings and events of one unit over ``[since, until)``.

    Parameters
    ----------
    frame : the unit's readings (SI), wide, indexed by UTC time.
    unit : its description.
    baseline : fault-free reference models; None for the day-one rules.
    since, until : the period (defaults: the frame's extent).
    tariff_per_kWh : energy price for the cost figures [currency/kWh].
    """
    prepared = prepare(frame, unit, since, until)
    hourly, impacts = _residuals(prepared, unit, baseline)
    device_class = "valve" if unit.holds_superheat else "orifice"
    faulty = quality.faulty_points(prepared.quality)
    diagnosis = diagnose.diagnose(
        hourly, device_class, faulty, impacts, tariff_per_kWh, residual_drift=baseline is not None
    )
    findings = prepared.quality
    findings.merge(diagnosis)
    findings.steady_samples = diagnosis.steady_samples
    found_events = events.derive_events(unit.key, findings)
    stats = {
        "minutes": len(prepared.grid),
        "running_minutes": int(np.count_nonzero(prepared.running.to_numpy())),
        "steady_minutes": int(np.count_nonzero(prepared.steady.to_numpy())),
        "hours_judged": int(_judged_hours(diagnosis).sum()),
        "hours_extrapolated": int(np.count_nonzero(hourly.extrapolated > 0.5)),
        "mode": "baseline" if baseline is not None else "day-one rules",
    }
    return UnitAnalysis(unit.key, findings, found_events, stats)
