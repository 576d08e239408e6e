"""Operating-state labels against the documented minimum durations (physics/standstill.py)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from rimewatch.physics import standstill


def _minutes(n, start="2025-06-01 00:00"):
    return pd.date_range(start, periods=n, freq="1min", tz="UTC")


def test_status_durations():
    # 60 min off, then 30 min on; durations per the module's documented rules (common practice)
    status = np.r_[np.zeros(60), np.ones(30)]
    frame = pd.DataFrame({"compressor_status": status}, index=_minutes(90))
    states = standstill.operating_state(frame)
    # the data start unseen: off counts from the first sample, standstill from minute 30
    assert (states.iloc[:30] == "transient").all()
    assert (states.iloc[30:60] == "standstill").all()
    # on at minute 60: running from minute 70 (10 min)
    assert (states.iloc[60:70] == "transient").all()
    assert (states.iloc[70:] == "running").all()


def test_gap_restarts_the_clock():
    index = _minutes(40).append(_minutes(40, "2025-06-01 01:00"))  # 20 min hole after minute 39
    frame = pd.DataFrame({"compressor_status": np.zeros(80)}, index=index)
    states = standstill.operating_state(frame)
    assert (states.iloc[30:40] == "standstill").all()
    assert (states.iloc[40:70] == "transient").all()
    assert (states.iloc[70:] == "standstill").all()


def test_pressures_without_status():
    # converged (ratio 1.0) for 40 min, then 25 bar / 8 bar: ratio 3.1 > 1.5
    low = np.r_[np.full(40, 12e5), np.full(20, 8e5)]
    high = np.r_[np.full(40, 12e5), np.full(20, 25e5)]
    frame = pd.DataFrame({"suction_pressure": low, "discharge_pressure": high}, index=_minutes(60))
    states = standstill.operating_state(frame)
    assert (states.iloc[30:40] == "standstill").all()
    assert (states.iloc[50:] == "running").all()
    assert standstill.periods(states, "standstill") == [(frame.index[30], frame.index[39])]


def test_unknown_without_status_or_pressures():
    frame = pd.DataFrame({"suction_pressure": np.full(5, 8e5)}, index=_minutes(5))
    assert (standstill.operating_state(frame) == "unknown").all()


def test_missing_status_sample_is_unknown():
    status = np.r_[np.ones(20), np.nan, np.ones(20)]
    frame = pd.DataFrame({"compressor_status": status}, index=_minutes(41))
    states = standstill.operating_state(frame)
    assert states.iloc[20] == "unknown"
    # the clock restarts at minute 21: running from minute 31 (10 min)
    assert states.iloc[30] == "transient"
    assert states.iloc[31] == "running"


def test_needs_a_time_index():
    with pytest.raises(ValueError, match="indexed by time"):
        standstill.operating_state(pd.DataFrame({"compressor_status": [1.0, 0.0]}))
