"""Alignment on a one-minute grid, start-up exclusion and a steady-state detector.

Only steady samples feed diagnosis: right after a compressor start the suction and discharge
temperatures are still moving and every feature looks faulty for a few minutes.

* **Alignment.** Readings arrive at their own instants. :func:`align` averages each point over
  one-minute bins (label = bin start) and holds a value for at most ``HOLD_MINUTES`` bins when a
  point reports less often; anything older is a gap (NaN).
* **Start-up exclusion.** A sample counts as running only after the compressor has been on for
  ``STARTUP_EXCLUSION_S`` (10 minutes; the running criterion of
  :mod:`rimewatch.physics.standstill`, whose own docstring gives the reason: small air-cooled
  units settle within 5 to 10 minutes of a start).
* **Steady state.** A moving window of ``WINDOW_MINUTES`` minutes; a running sample is steady when
  the standard deviation of each key signal over the window ending at it stays below its limit in
  ``STEADY_LIMITS_K`` and the window holds at least ``MIN_WINDOW_SAMPLES`` running samples. The
  moving-window standard deviation is the usual steady-state test of the air-conditioner fault
  detection literature (used beside the Rossi and Braun (1997) classifier); the limits are ours,
  set a few times above the noise of good field sensors (0.1 to 0.2 K) and well below the swings
  of a start-up or a valve hunting.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from rimewatch.physics import standstill

GRID = "1min"
HOLD_MINUTES = 2
STARTUP_EXCLUSION_S = 600.0
WINDOW_MINUTES = 10
MIN_WINDOW_SAMPLES = 8
#: signal -> largest standard deviation over the window [K] for a steady sample
STEADY_LIMITS_K = {
    "t_evap": 0.5,
    "t_cond": 0.6,
    "suction_temp": 0.8,
    "liquid_temp": 0.6,
    "discharge_temp": 1.5,
    "supply_air_temp": 0.6,
}


def align(frame: pd.DataFrame, hold_minutes: int = HOLD_MINUTES) -> pd.DataFrame:
    """Put a unit's readings on a one-minute UTC grid.

    Parameters
    ----------
    frame : DataFrame indexed by tz-aware time, one column per point role (SI), NaN where a
        point has no sample (the shape :func:`rimewatch.store.read_unit_frame` returns).
    hold_minutes : a bin without a sample takes the last bin's value for at most this many bins.

    Returns
    -------
    DataFrame on a regular one-minute index (bin start), same columns.
    """
    if not isinstance(frame.index, pd.DatetimeIndex) or frame.index.tz is None:
        raise ValueError("align needs a frame indexed by timezone-aware time")
    if frame.empty:
        return frame.astype(float)
    index = frame.index
    stamps = index.asi8
    minute = 60 * _TICKS_PER_SECOND[index.unit]
    if (stamps[1:] > stamps[:-1]).all() and not (stamps % minute).any():
        # sorted readings already on whole minutes (one per bin): the bin means are the readings
        slots = (stamps - stamps[0]) // minute
        bins = pd.date_range(
            pd.Timestamp(stamps[0], unit=index.unit, tz=index.tz),
            periods=int(slots[-1]) + 1,
            freq=GRID,
            name=index.name,
            unit=index.unit,
        )
        # one row per column: each column's values stay contiguous for every later step
        if len(bins) == len(index):  # no bin missing
            rows = frame.to_numpy(dtype=float).T.copy()
        else:
            rows = np.full((frame.shape[1], len(bins)), np.nan)
            rows[:, slots] = frame.to_numpy(dtype=float).T
    else:
        grid = frame.sort_index().astype(float).resample(GRID).mean()
        bins, rows = grid.index, grid.to_numpy().T.copy()
    if hold_minutes > 0:
        _hold(rows, hold_minutes)
    if "compressor_status" in frame.columns:
        status = frame.columns.get_loc("compressor_status")
        rows[status] = np.round(rows[status])
    return pd.DataFrame(rows.T, index=bins, columns=frame.columns, copy=False)


#: ticks of a DatetimeIndex unit per second
_TICKS_PER_SECOND = {"s": 1, "ms": 1_000, "us": 1_000_000, "ns": 1_000_000_000}


def _hold(rows: np.ndarray, limit: int) -> None:
    """Fill each row's gaps in place with the last value at most ``limit`` samples before (NaN
    beyond), as pandas' ``ffill(limit=limit)`` does."""
    measured = rows.copy()
    for back in range(1, limit + 1):
        np.copyto(rows[:, back:], measured[:, :-back], where=np.isnan(rows[:, back:]))


def running(grid: pd.DataFrame, startup_exclusion_s: float = STARTUP_EXCLUSION_S) -> pd.Series:
    """True where the compressor has run for at least ``startup_exclusion_s`` [s]."""
    return running_and_standstill(grid, startup_exclusion_s)[0]


def standstill_samples(grid: pd.DataFrame) -> pd.Series:
    """True where the compressor has been off long enough for the pressures to equalise."""
    return running_and_standstill(grid)[1]


def running_and_standstill(
    grid: pd.DataFrame, startup_exclusion_s: float = STARTUP_EXCLUSION_S
) -> tuple[pd.Series, pd.Series]:
    """Both masks from one pass (standstill after ``physics.standstill.MIN_STANDSTILL_S``)."""
    state = standstill.operating_state(grid, min_running_s=startup_exclusion_s).to_numpy()
    return (
        pd.Series(state == standstill.RUNNING, index=grid.index, name="running"),
        pd.Series(state == standstill.STANDSTILL, index=grid.index, name="standstill"),
    )


def steady(
    signals: pd.DataFrame,
    running_mask: pd.Series,
    limits: dict[str, float] | None = None,
    window_minutes: int = WINDOW_MINUTES,
    min_samples: int = MIN_WINDOW_SAMPLES,
) -> pd.Series:
    """Steady samples: running, and every key signal quiet over the window ending at the sample.

    Parameters
    ----------
    signals : one-minute frame with some of the columns of ``limits`` ([K]); missing ones are
        not judged.
    running_mask : :func:`running` (start-up excluded).
    limits : signal -> largest moving-window standard deviation [K]; default ``STEADY_LIMITS_K``.
    """
    limits = STEADY_LIMITS_K if limits is None else limits
    run = running_mask.to_numpy(dtype=bool)
    ok = run & (window_count(run, window_minutes) >= min_samples)
    names = [name for name in limits if name in signals]
    if names:
        columns = signals.to_numpy(dtype=float).T
        rows = columns[[signals.columns.get_loc(name) for name in names]]
        rows[:, ~run] = np.nan
        spread = _moving_std(rows, window_minutes, min_samples)
        limit = np.array([limits[name] for name in names])[:, None]
        ok &= (~np.isnan(rows) & (spread <= limit)).all(axis=0)
    return pd.Series(ok, index=signals.index, name="steady")


def window_count(flags: np.ndarray, window: int) -> np.ndarray:
    """Number of true ``flags`` among the ``window`` (>= 1) samples ending at each sample."""
    total = np.cumsum(flags)
    total[window:] -= total[:-window]
    return total


def _moving_std(rows: np.ndarray, window: int, min_samples: int) -> np.ndarray:
    """Sample standard deviation (ddof 1) of each row over the ``window`` samples ending at each
    sample, NaN ignored (as are infinities); NaN where fewer than ``min_samples`` are present.

    pandas' rolling std (public API), so that exact ties with a limit are decided as before.
    """
    frame = pd.DataFrame(np.where(np.isinf(rows), np.nan, rows).T)
    return frame.rolling(window, min_periods=min_samples).std().to_numpy().T
