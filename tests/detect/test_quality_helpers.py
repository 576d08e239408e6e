"""detect.quality helpers against independent implementations: pandas' groupby median and
DatetimeIndex.get_indexer of the floored hours."""

from __future__ import annotations

import numpy as np
import pandas as pd

from rimewatch.detect.quality import hour_slots, hourly_medians


def test_hourly_medians_match_pandas_groupby_median():
    rng = np.random.default_rng(7)
    for _ in range(50):
        n = int(rng.integers(0, 200))
        slot = np.sort(rng.integers(-1, 12, n))  # -1: outside the judged hours
        values = rng.normal(0.0, 5.0, n)
        values[rng.random(n) < 0.2] = np.nan
        medians, sizes = hourly_medians(values, slot, 12)
        inside = (slot >= 0) & ~np.isnan(values)
        groups = pd.Series(values[inside]).groupby(slot[inside])
        np.testing.assert_array_equal(medians, groups.median().reindex(range(12)).to_numpy())
        np.testing.assert_array_equal(sizes, groups.size().reindex(range(12), fill_value=0))
    # several series at once, slots in any order: each row as pandas has it
    slot = rng.integers(-1, 12, 300)
    rows = rng.normal(0.0, 5.0, (3, 300))
    rows[rng.random((3, 300)) < 0.2] = np.nan
    medians, sizes = hourly_medians(rows, slot, 12)
    assert medians.shape == sizes.shape == (3, 12)
    for row, row_medians, row_sizes in zip(rows, medians, sizes, strict=True):
        inside = (slot >= 0) & ~np.isnan(row)
        groups = pd.Series(row[inside]).groupby(slot[inside])
        np.testing.assert_array_equal(row_medians, groups.median().reindex(range(12)).to_numpy())
        np.testing.assert_array_equal(row_sizes, groups.size().reindex(range(12), fill_value=0))
    # even count: mean of the two middle values; NaN ignored; an empty hour has no median
    medians, sizes = hourly_medians(np.array([4.0, 1.0, np.nan, 3.0, 2.0]), np.zeros(5, int), 2)
    assert medians[0] == 2.5 and sizes.tolist() == [4, 0] and np.isnan(medians[1])


def test_hour_slots_match_pandas_get_indexer_of_the_floored_hours():
    rng = np.random.default_rng(4)
    start = pd.Timestamp("2026-07-08", tz="UTC")
    instants = pd.DatetimeIndex(
        start + pd.to_timedelta(np.sort(rng.integers(-4 * 3600, 30 * 3600, 500)), unit="s")
    )
    for hours in (
        pd.date_range(start, periods=24, freq="1h"),  # regular: integer division
        pd.date_range(start, periods=24, freq="1h")[::2],  # every other hour: pandas path
    ):
        for unit in ("ms", "us", "ns"):
            index = instants.as_unit(unit)
            expected = hours.get_indexer(index.floor("1h"))
            np.testing.assert_array_equal(hour_slots(index, hours), expected)
            assert (expected == -1).any() and (expected >= 0).any()  # both cases present
