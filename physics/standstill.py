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


def compressor_on(frame: pd.DataFrame, pressure_columns=None) -> pd.Series:
    """Whether the compressor runs at each sample: 1.0 on, 0.0 off, NaN unknown.

    Parameters
    ----------
    frame : DataFrame indexed by time; may hold ``compressor_status`` [-] and pressure columns [Pa].
    pressure_columns : names of pressure columns to use when there is no status; default: every
        column whose name ends in ``_pressure``.
    """
    if "compressor_status" in frame and frame["compressor_status"].notna().any():
        status = frame["compressor_status"].astype(float)
        return status.where(status.isna(), (status >= 0.5).astype(float))
    if pressure_columns is None:
        pressure_columns = [c for c in frame.columns if str(c).endswith("_pressure")]
    pressures = frame[list(pressure_columns)].astype(float)
    pressures = pressures.where(pressures > 0)
    known = pressures.notna().sum(axis=1) >= 2
    ratio = pressures.max(axis=1) / pressures.min(axis=1)
    on = (ratio >= CONVERGED_PRESSURE_RATIO).astype(float)
    return on.where(known)


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
    on = compressor_on(frame, pressure_columns)
    seconds = (frame.index - frame.index[0]) / pd.Timedelta("1s")
    seconds = np.asarray(seconds, dtype=float)
    state = on.to_numpy(dtype=float, na_value=np.nan)
    previous = np.concatenate(([np.nan], state[:-1]))
    gap = np.concatenate(([np.inf], np.diff(seconds))) > max_gap_s
    changed = gap | ~((state == previous) | (np.isnan(state) & np.isnan(previous)))
    segment = np.cumsum(changed)
    segment_start = pd.Series(seconds).groupby(segment).transform("first").to_numpy()
    elapsed = seconds - segment_start
    # The first segment (and any after a gap) starts unseen: its elapsed time is a lower bound.
    labels = np.full(len(frame), TRANSIENT, dtype=object)
    labels[np.isnan(state)] = UNKNOWN
    labels[(state == 1.0) & (elapsed >= min_running_s)] = RUNNING
    labels[(state == 0.0) & (elapsed >= min_standstill_s)] = STANDSTILL
    return pd.Series(labels, index=frame.index, name="operating_state", dtype="str")


def periods(states: pd.Series, label: str) -> list[tuple[pd.Timestamp, pd.Timestamp]]:
    """Contiguous (first, last) timestamps of the samples labelled ``label``, in time order."""
    mask = (states == label).to_numpy()
    if not mask.any():
        return []
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(int), [0]))))
    starts, stops = edges[::2], edges[1::2] - 1
    return [(states.index[a], states.index[b]) for a, b in zip(starts, stops, strict=True)]
