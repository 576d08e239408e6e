"""Alignment, start-up exclusion and the steady-state detector."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from simulated import ONSET, START, readings, unit_info

from rimewatch.detect import steady
from rimewatch.detect.pipeline import prepare


def _utc(text):
    return pd.Timestamp(text, tz="UTC")


def test_align_averages_bins_and_holds_at_most_two_minutes():
    # The worked example of library-notes section 5 (verified there with pandas 3).
    raw = pd.DataFrame(
        {
            "suction_pressure": [3.10, 3.20, 3.30, 3.40, np.nan],
            "suction_temp": [np.nan] * 4 + [5.0],
        },
        index=pd.DatetimeIndex(
            [
                _utc("2025-06-01 12:00:10"),
                _utc("2025-06-01 12:00:50"),
                _utc("2025-06-01 12:01:10"),
                _utc("2025-06-01 12:04:55"),
                _utc("2025-06-01 12:00:30"),
            ]
        ),
    )
    grid = steady.align(raw)
    assert grid.index.freq == pd.Timedelta("1min")
    assert grid.loc[_utc("2025-06-01 12:00"), "suction_pressure"] == pytest.approx(3.15)
    assert grid.loc[_utc("2025-06-01 12:00"), "suction_temp"] == 5.0
    # 12:01 measured, 12:02 and 12:03 held, 12:04 measured again
    assert grid.loc[_utc("2025-06-01 12:03"), "suction_pressure"] == pytest.approx(3.3)
    assert grid.loc[_utc("2025-06-01 12:04"), "suction_pressure"] == pytest.approx(3.4)
    # the temperature is held for two bins, then it is a gap
    assert grid.loc[_utc("2025-06-01 12:02"), "suction_temp"] == 5.0
    assert np.isnan(grid.loc[_utc("2025-06-01 12:03"), "suction_temp"])


def test_align_refuses_naive_time():
    frame = pd.DataFrame({"a": [1.0]}, index=pd.DatetimeIndex([pd.Timestamp("2025-01-01")]))
    with pytest.raises(ValueError, match="timezone-aware"):
        steady.align(frame)


def test_start_up_excluded_for_ten_minutes_after_each_start():
    index = pd.date_range("2026-07-01", periods=120, freq="1min", tz="UTC")
    status = np.zeros(120)
    status[20:80] = 1.0  # one 60-minute run
    grid = pd.DataFrame({"compressor_status": status}, index=index)
    run = steady.running(grid)
    assert not run.iloc[:30].any()  # off, then the first 10 minutes of the run
    assert run.iloc[30:80].all()
    assert not run.iloc[80:].any()


def test_steady_rejects_a_moving_signal_and_accepts_a_quiet_one():
    index = pd.date_range("2026-07-01", periods=60, freq="1min", tz="UTC")
    rng = np.random.default_rng(0)
    quiet = 280.0 + rng.normal(0.0, 0.1, 60)  # field-sensor noise
    moving = quiet.copy()
    moving[30:] += np.linspace(0.0, 6.0, 30)  # a 6 K drift over half an hour
    running = pd.Series(True, index=index)
    assert steady.steady(pd.DataFrame({"t_evap": quiet}, index=index), running).iloc[10:].all()
    result = steady.steady(pd.DataFrame({"t_evap": moving}, index=index), running)
    assert not result.iloc[40:].any()
    assert result.iloc[10:30].all()


def test_no_steady_sample_right_after_a_simulated_start():
    """The simulator's start-up transients (relaxation after each start) are never steady."""
    prepared = prepare(readings("rooftop_unit"), unit_info("rooftop_unit"), START, ONSET)
    grid, steady_mask = prepared.grid, prepared.steady
    status = grid["compressor_status"].fillna(0.0).to_numpy()
    starts = np.flatnonzero(np.diff(status) > 0) + 1
    assert len(starts) > 5
    early = set()
    for s in starts:
        early.update(grid.index[s : s + 10])
    steady_times = set(steady_mask.index[steady_mask.to_numpy()])
    assert steady_times, "a week of running should have steady samples"
    assert not (steady_times & early)
