"""Operating state per sample: running, standstill (pressures equalised), transient or unknown.

Commissioning checks need two kinds of sample. *Running* samples, taken after the compressor has run
long enough for the start-up transient to pass, show the two pressure levels of the cycle.
*Standstill* samples, taken after the compressor has been off long enough, show an equalised
circuit: one pressure everywhere, pipes at the temperature of their surroundings, and (with liquid
present) that pressure is the refrigerant's saturation pressure at the surrounding temperature.

The compressor state comes from ``compressor_status`` (1 on, 0 off) when that point has readings,
otherwise from the pressures themselves: a high-to-low pressure ratio of at least
``CONVERGED_PRESSURE_RATIO`` means the compressor runs, below it the pressures have converged.

Minimum durations (common practice, from memory; they are generous on purpose, since a false
standstill would blame a good sensor):

* ``MIN_RUNNING_S`` = 600 s: the suction and discharge temperatures of a small air-cooled unit
  settle within 5 to 10 minutes of a start.
* ``MIN_STANDSTILL_S`` = 1800 s: pressures equalise through a thermostatic valve or an orifice
  within minutes, but pipe and coil temperatures need tens of minutes to relax to their
  surroundings.
* ``MAX_GAP_S`` = 900 s: a hole in the data longer than this restarts the clock, since the
  compressor may have cycled unseen.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

MIN_RUNNING_S = 600.0
MIN_STANDSTILL_S = 1800.0
MAX_GAP_S = 900.0
CONVERGED_PRESSURE_RATIO = 1.5

RUNNING = "running"
STANDSTILL = "standstill"
TRANSIENT = "transient"
UNKNOWN = "unknown"


#: Labels by state code (the index), see :func:`operating_state`.
_LABELS = pd.array([TRANSIENT, UNKNOWN, RUNNING, STANDSTILL], dtype="str")
_TRANSIENT_CODE, _UNKNOWN_CODE, _RUNNING_CODE, _STANDSTILL_CODE = range(4)


def compressor_on(frame: pd.DataFrame, pressure_columns=None) -> pd.Series:
    """Whether the compressor runs at each sample: 1.0 on, 0.0 off, NaN unknown.

    Parameters
    ----------
    frame : DataFrame indexed by time; may hold ``compressor_status`` [-] and pressure columns [Pa].
    pressure_columns : names of pressure columns to use when there is no status; default: every
        column whose name ends in ``_pressure``.
    """
    status = _status(frame)
    if status is not None:
        return pd.Series(_on_from_status(status), index=frame.index, name="compressor_status")
    return pd.Series(_on_from_pressures(frame, pressure_columns), index=frame.index)


def _compressor_on(frame: pd.DataFrame, pressure_columns) -> np.ndarray:
    """:func:`compressor_on` as an array."""
    status = _status(frame)
    if status is not None:
        return _on_from_status(status)
    return _on_from_pressures(frame, pressure_columns)


def _status(frame: pd.DataFrame) -> np.ndarray | None:
    """The ``compressor_status`` readings [-] as floats; None when the point has no reading."""
    if "compressor_status" not in frame:
        return None
    status = frame["compressor_status"].to_numpy(dtype=float, na_value=np.nan)
    return None if np.isnan(status).all() else status


def _on_from_status(status: np.ndarray) -> np.ndarray:
    """1.0 where the status is at least 0.5, 0.0 below, NaN where it is missing."""
    return np.where(np.isnan(status), np.nan, (status >= 0.5).astype(float))


def _on_from_pressures(frame: pd.DataFrame, pressure_columns) -> np.ndarray:
    """1.0 where the highest over the lowest positive pressure [Pa] reaches
    ``CONVERGED_PRESSURE_RATIO``, 0.0 below, NaN with fewer than two positive pressures."""
    if pressure_columns is None:
        pressure_columns = [c for c in frame.columns if str(c).endswith("_pressure")]
    pressure_columns = list(pressure_columns)
    on = np.full(len(frame), np.nan)
    if not pressure_columns:
        return on
    pressures = np.column_stack(
        [frame[name].to_numpy(dtype=float, na_value=np.nan) for name in pressure_columns]
    )
    with np.errstate(invalid="ignore"):
        pressures[~(pressures > 0)] = np.nan
    known = np.count_nonzero(~np.isnan(pressures), axis=1) >= 2
    # fmax/fmin skip NaN, as pandas' row max/min do
    ratio = np.fmax.reduce(pressures, axis=1)[known] / np.fmin.reduce(pressures, axis=1)[known]
    on[known] = (ratio >= CONVERGED_PRESSURE_RATIO).astype(float)
    return on


def operating_state(
    frame: pd.DataFrame,
    *,
    pressure_columns=None,
    min_running_s: float = MIN_RUNNING_S,
    min_standstill_s: float = MIN_STANDSTILL_S,
    max_gap_s: float = MAX_GAP_S,
) -> pd.Series:
    """Label each sample ``"running"``, ``"standstill"``, ``"transient"`` or ``"unknown"``.

    A sample is running when the compressor has been on for at least ``min_running_s`` [s], and
    standstill when it has been off for at least ``min_standstill_s`` [s], both counted from the
    last change of state (or the last gap longer than ``max_gap_s`` [s], or the start of the data:
    a series that starts with the compressor off has not been seen off long enough until
    ``min_standstill_s`` has passed). Samples closer to a change are transient; samples whose state
    is unknown (no status and fewer than two pressures) are unknown.

    Parameters
    ----------
    frame : DataFrame with a sorted, tz-aware DatetimeIndex; see :func:`compressor_on`.
    """
    if not isinstance(frame.index, pd.DatetimeIndex):
        raise ValueError("operating_state needs a frame indexed by time (DatetimeIndex)")
    if not frame.index.is_monotonic_increasing:
        raise ValueError("operating_state needs a frame sorted by time")
    state = _compressor_on(frame, pressure_columns)
    elapsed = _elapsed_in_state(_seconds(frame.index), state, max_gap_s)
    # The first segment (and any after a gap) starts unseen: its elapsed time is a lower bound.
    codes = np.full(len(frame), _TRANSIENT_CODE, dtype=np.intp)
    codes[np.isnan(state)] = _UNKNOWN_CODE
    codes[(state == 1.0) & (elapsed >= min_running_s)] = _RUNNING_CODE
    codes[(state == 0.0) & (elapsed >= min_standstill_s)] = _STANDSTILL_CODE
    return pd.Series(_LABELS.take(codes), index=frame.index, name="operating_state", copy=False)


def _seconds(index: pd.DatetimeIndex) -> np.ndarray:
    """Seconds since the first timestamp (the index holds no NaT: it is sorted)."""
    ticks = index.asi8
    return (ticks - ticks[0]) / (np.timedelta64(1, "s") / np.timedelta64(1, index.unit))


def _elapsed_in_state(seconds: np.ndarray, state: np.ndarray, max_gap_s: float) -> np.ndarray:
    """Seconds since the state (1.0, 0.0 or NaN) last changed or the data last had a gap longer
    than ``max_gap_s`` [s]; from the first sample when neither happened."""
    previous = np.concatenate(([np.nan], state[:-1]))
    gap = np.concatenate(([np.inf], np.diff(seconds))) > max_gap_s
    changed = gap | ~((state == previous) | (np.isnan(state) & np.isnan(previous)))
    # the samples are contiguous in time: a segment starts at its last change
    last_change = np.maximum.accumulate(np.where(changed, np.arange(len(state)), 0))
    return seconds - seconds[last_change]


def periods(states: pd.Series, label: str) -> list[tuple[pd.Timestamp, pd.Timestamp]]:
    """Contiguous (first, last) timestamps of the samples labelled ``label``, in time order."""
    mask = (states == label).to_numpy()
    if not mask.any():
        return []
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(int), [0]))))
    starts, stops = edges[::2], edges[1::2] - 1
    return [(states.index[a], states.index[b]) for a, b in zip(starts, stops, strict=True)]
