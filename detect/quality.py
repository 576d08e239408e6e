"""Data quality: sensor faults found in the readings themselves (``sensor_fault`` findings).

Kinds (design.md): ``out_of_range``, ``stuck``, ``drift``, ``implausible``, ``offline``. Each check
runs per UTC hour and per point; its finding key is ``sensor_fault:<point>:<kind>``. A sensor
finding suppresses, for that hour, every diagnosis feature that depends on the point (see
:data:`FEATURE_POINTS`), so a broken sensor never turns into a refrigerant fault.

Checks and thresholds (ours unless marked; chosen to sit well above the accuracy of field
sensors: about 0.2-0.5 K for temperatures, 1 % of span for pressure transducers):

* **out_of_range**: a value outside the in-service range of its role (:data:`SERVICE_RANGES`;
  pressures also above the refrigerant's critical pressure, compressor power and current above
  ``POWER_PER_CAPACITY_MAX`` / ``CURRENT_PER_CAPACITY_MAX`` times the nominal capacity). Such
  samples are always blanked before analysis; the finding needs at least ``OUT_OF_RANGE_SHARE``
  of an hour's samples, so a lone garbage value is only blanked.
* **stuck**: exactly the same value for ``STUCK_MINUTES`` while the compressor changed state or
  ran (refrigerant-side, supply and condenser-leaving points must move then), or for
  ``STUCK_AMBIENT_MINUTES`` for ambient and zone points.
* **drift**: at standstill (compressor off for 30 min, :mod:`rimewatch.physics.standstill`) the
  circuit equalises at the saturation pressure of the coldest surroundings, where liquid
  collects. A pressure whose saturation temperature is ``DRIFT_LIMIT_K`` away from that of the
  other pressure and from the coldest air temperature has drifted. This needs a unit whose
  pressures equalise at standstill (fixed orifice, bleed-port or open-at-stop valves). A residual
  model can also show drift (one feature off alone, see :mod:`rimewatch.detect.diagnose`).
* **implausible**: in steady running, superheat below ``-IMPLAUSIBLE_K`` (suction colder than its
  own dew point), liquid warmer than its bubble point by more than ``IMPLAUSIBLE_K``, or discharge
  colder than the condensing dew point: physically impossible in a sound circuit, so a sensor (or
  its mounting) is wrong. Hourly medians over at least ``MIN_IMPLAUSIBLE_SAMPLES`` samples.
* **offline**: a point without any sample for a whole hour while the others report; the whole
  unit silent is ``all:offline``. Short outages are gaps, not faults: the event policy asks
  offline findings to last ``OFFLINE_MIN_HOURS`` (see :mod:`rimewatch.detect.events`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from rimewatch.detect.features import columns_of
from rimewatch.detect.findings import Finding, HourlyFindings, finding_key
from rimewatch.detect.steady import window_count
from rimewatch.detect.unit import UnitInfo
from rimewatch.physics import fast
from rimewatch.physics.refrigerant import get_refrigerant

#: In-service plausible range of each role [SI]; wider ranges (ingest) only catch garbage.
SERVICE_RANGES = {
    "suction_pressure": (5e3, None),
    "discharge_pressure": (5e3, None),
    "liquid_pressure": (5e3, None),
    "suction_temp": (213.15, 373.15),
    "liquid_temp": (233.15, 363.15),
    "discharge_temp": (233.15, 453.15),
    "evaporator_outlet_temp": (213.15, 373.15),
    "outdoor_air_temp": (223.15, 333.15),
    "condenser_leaving_air_temp": (223.15, 353.15),
    "return_air_temp": (233.15, 333.15),
    "supply_air_temp": (233.15, 333.15),
    "box_temp": (223.15, 323.15),
    "return_air_humidity": (0.0, 1.0),
    "compressor_power": (0.0, None),
    "compressor_current": (0.0, None),
    "compressor_status": (0.0, 1.0),
}
REFRIGERANT_POINTS = (
    "suction_pressure",
    "discharge_pressure",
    "liquid_pressure",
    "suction_temp",
    "liquid_temp",
    "discharge_temp",
    "supply_air_temp",
    "condenser_leaving_air_temp",
)
AMBIENT_POINTS = ("outdoor_air_temp", "return_air_temp", "return_air_humidity", "box_temp")
RUNNING_ONLY_POINTS = ("compressor_power", "compressor_current")

#: compressor power and current above these multiples of the nominal cooling capacity [W/W],
#: [A/W] are not credible (a COP of 1/3; 20 A per kW)
POWER_PER_CAPACITY_MAX = 3.0
CURRENT_PER_CAPACITY_MAX = 0.02
OUT_OF_RANGE_SHARE = 0.1
STUCK_MINUTES = 120
STUCK_AMBIENT_MINUTES = 720
DRIFT_LIMIT_K = 2.0
DRIFT_AGREE_K = 1.0
MIN_STANDSTILL_SAMPLES = 20
IMPLAUSIBLE_K = 2.0
MIN_IMPLAUSIBLE_SAMPLES = 20
OFFLINE_MIN_HOURS = 6

#: Diagnosis feature -> points it is computed from (drivers of the reference models excluded).
FEATURE_POINTS = {
    "t_evap": ("suction_pressure",),
    "t_cond": ("discharge_pressure", "outdoor_air_temp"),
    "superheat": ("suction_pressure", "suction_temp"),
    "subcooling": ("discharge_pressure", "liquid_pressure", "liquid_temp"),
    "discharge_temp": ("discharge_temp",),
    "liquid_approach": ("liquid_temp", "outdoor_air_temp"),
    "evaporator_air_drop": ("return_air_temp", "box_temp", "supply_air_temp"),
    "condenser_air_rise": ("condenser_leaving_air_temp", "outdoor_air_temp"),
    "volumetric_efficiency_ratio": (
        "compressor_power", "suction_pressure", "discharge_pressure", "suction_temp",
        "discharge_temp",
    ),
    "condenser_airflow_ratio": (
        "condenser_leaving_air_temp", "outdoor_air_temp", "discharge_temp", "liquid_temp",
    ),
    "evaporator_airflow_ratio": ("supply_air_temp", "return_air_temp", "return_air_humidity"),
    "liquid_line_drop": ("discharge_pressure", "liquid_pressure"),
}  # fmt: skip
#: Points every reference model depends on: a fault there stops the whole diagnosis that hour.
DRIVER_POINTS = (
    "outdoor_air_temp",
    "return_air_temp",
    "return_air_humidity",
    "box_temp",
    "suction_pressure",
)


def service_ranges(unit: UnitInfo) -> dict[str, tuple[float, float]]:
    """:data:`SERVICE_RANGES` with the open upper pressure limits set to the critical pressure."""
    p_crit = get_refrigerant(unit.refrigerant).critical_pressure
    capacity = unit.nominal_capacity_W
    upper = {
        "compressor_power": POWER_PER_CAPACITY_MAX * capacity if capacity else 1e7,
        "compressor_current": CURRENT_PER_CAPACITY_MAX * capacity if capacity else 1e4,
    }
    out = {}
    for role, (low, high) in SERVICE_RANGES.items():
        if high is None:
            high = 1.05 * p_crit if role.endswith("pressure") else upper[role]
        out[role] = (low, high)
    return out


def blank_out_of_range(grid: pd.DataFrame, unit: UnitInfo) -> tuple[pd.DataFrame, pd.DataFrame]:
    """(grid with implausible values set to NaN, boolean frame of the blanked samples)."""
    ranges = service_ranges(unit)
    bounds = [ranges.get(role, (-np.inf, np.inf)) for role in grid.columns.tolist()]
    low, high = np.array(bounds, dtype=float).reshape(-1, 2).T
    rows = grid.to_numpy(dtype=float).T.copy()  # one row per column, as align lays them out
    bad = (rows < low[:, None]) | (rows > high[:, None])  # NaN compares false: gaps stay
    rows[bad] = np.nan
    return (
        pd.DataFrame(rows.T, index=grid.index, columns=grid.columns, copy=False),
        pd.DataFrame(bad.T, index=grid.index, columns=grid.columns, copy=False),
    )


def _hours(index: pd.DatetimeIndex) -> pd.DatetimeIndex:
    return index.floor("1h")


#: ticks of a DatetimeIndex unit per hour
_TICKS_PER_HOUR = {"s": 3_600, "ms": 3_600_000, "us": 3_600_000_000, "ns": 3_600_000_000_000}
_ONE_HOUR = pd.offsets.Hour(1)


def hour_slots(index: pd.DatetimeIndex, hours: pd.DatetimeIndex) -> np.ndarray:
    """Position in ``hours`` of the UTC hour holding each instant of ``index``; -1 outside.

    The same as ``hours.get_indexer(index.floor("1h"))``, by integer division when ``hours`` is a
    regular hourly UTC range (as the analysis builds it).
    """
    regular = (
        len(hours) > 0
        and hours.freq == _ONE_HOUR
        and str(hours.tz) == "UTC"
        and str(index.tz) == "UTC"
        and hours.asi8[0] % _TICKS_PER_HOUR[hours.unit] == 0
    )
    if not regular:
        return hours.get_indexer(_hours(index))
    hour = _TICKS_PER_HOUR[index.unit]
    first = hours.asi8[0] // _TICKS_PER_HOUR[hours.unit] * hour  # in the ticks of ``index``
    slot = (index.asi8 - first) // hour
    slot[(slot < 0) | (slot >= len(hours))] = -1
    return slot.astype(np.intp, copy=False)


def check_quality(
    grid: pd.DataFrame,
    blanked: pd.DataFrame,
    running_mask: pd.Series,
    standstill_mask: pd.Series,
    unit: UnitInfo,
    hours: pd.DatetimeIndex,
    features: pd.DataFrame | None = None,
    steady_mask: pd.Series | None = None,
) -> HourlyFindings:
    """Every sensor check over one unit's one-minute grid.

    Parameters
    ----------
    grid : readings on the one-minute grid, out-of-range values already blanked.
    blanked : which samples :func:`blank_out_of_range` removed.
    running_mask, standstill_mask : from :mod:`rimewatch.detect.steady`.
    hours : the UTC hours to report on.
    features, steady_mask : per-minute features of running samples and their steadiness (for the
        implausible-combination checks); optional.
    """
    out = HourlyFindings.empty(hours)
    columns, blanked_columns = columns_of(grid), columns_of(blanked, dtype=bool)
    points = [c for c in columns if c in SERVICE_RANGES and c != "compressor_status"]
    values = np.array([columns[role] for role in points]).reshape(len(points), len(grid))
    bad = np.array([blanked_columns[role] for role in points], dtype=bool).reshape(values.shape)
    slot = hour_slots(grid.index, hours)
    hourly_count = _hourly_counter(slot, len(hours))  # points x hours
    measured = ~np.isnan(values)
    counts = hourly_count(measured | bad)
    bad_counts = hourly_count(bad)
    any_data = counts.sum(axis=0) > 0

    # offline: the whole unit, then single points while others report
    out.set_positions(
        finding_key("sensor_fault", "all:offline"),
        np.ones(len(hours), dtype=bool),
        {k: Finding(1.0, 1.0, "no readings at all this hour") for k in _where(~any_data)},
    )
    reported = counts > 0
    share = np.divide(bad_counts, counts, out=np.zeros(counts.shape), where=reported)
    silent = _where_by_row(~reported & any_data)
    out_of_range = _where_by_row(reported & (share >= OUT_OF_RANGE_SHARE))
    for j, role in enumerate(points):
        out.set_positions(
            finding_key("sensor_fault", f"{role}:offline"),
            any_data,
            {k: Finding(1.0, 1.0, f"{role}: no readings this hour") for k in silent[j]},
        )
        out.set_positions(
            finding_key("sensor_fault", f"{role}:out_of_range"),
            reported[j],
            {
                k: Finding(
                    float(min(1.0, share[j, k])),
                    1.0,
                    f"{role}: {share[j, k]:.0%} of the hour's values out of range",
                )
                for k in out_of_range[j]
            },
        )

    run = running_mask.to_numpy(dtype=bool)
    checked = hourly_count(measured) > 0
    flat = _flat(values, points, columns.get("compressor_status"), run)
    stuck = _where_by_row((hourly_count(flat) > 0) & checked)
    for j, role in enumerate(points):
        window = STUCK_AMBIENT_MINUTES if role in AMBIENT_POINTS else STUCK_MINUTES
        found = {
            k: Finding(1.0, 0.9, f"{role}: the same value for {window} minutes") for k in stuck[j]
        }
        out.set_positions(finding_key("sensor_fault", f"{role}:stuck"), checked[j], found)
    _check_standstill_drift(out, columns, standstill_mask, unit, hours, slot)
    if features is not None and steady_mask is not None:
        _check_implausible(out, features, steady_mask, hours)
    return out


def _hourly_counter(slot: np.ndarray, n_hours: int):
    """A function counting true flags (points x samples) per point and hour slot (-1 ignored)."""
    rows = np.flatnonzero(slot >= 0)
    rows = rows[np.argsort(slot[rows], kind="stable")]  # grouped by hour
    if len(rows) and rows[-1] - rows[0] == len(rows) - 1:  # sorted and contiguous: a slice
        rows = slice(rows[0], rows[-1] + 1)
    sizes = np.bincount(slot[rows], minlength=n_hours)
    present = np.flatnonzero(sizes)
    starts = (np.cumsum(sizes) - sizes)[present]  # first sample of each hour present

    def count(flags: np.ndarray) -> np.ndarray:
        counts = np.zeros((len(flags), n_hours), dtype=int)
        if len(starts):
            counts[:, present] = np.add.reduceat(flags[:, rows], starts, axis=1, dtype=int)
        return counts

    return count


def _where(mask: np.ndarray) -> list[int]:
    return np.flatnonzero(mask).tolist()


def _where_by_row(mask: np.ndarray) -> list[list[int]]:
    """:func:`_where` of each row of a 2-D mask."""
    found = [[] for _ in range(len(mask))]
    rows, columns = np.nonzero(mask)
    for row, column in zip(rows.tolist(), columns.tolist(), strict=True):
        found[row].append(column)
    return found


def _held(rows: np.ndarray, window: np.ndarray) -> np.ndarray:
    """True where a row has held exactly the same value for at least its ``window`` (one per
    row, >= 2) samples in a row, up to and including this one; NaN never counts."""
    held = np.zeros(rows.size + 1, dtype=int)  # +1 where a held stretch starts, -1 after it
    if rows.size == 0:
        return held[:-1].reshape(rows.shape) > 0
    n = rows.shape[1]
    flat = rows.ravel()
    starts = np.ones(flat.size, dtype=bool)
    np.not_equal(flat[1:], flat[:-1], out=starts[1:])  # NaN != NaN: a gap starts a new run
    starts[::n] = True  # each row starts afresh
    first = np.flatnonzero(starts)
    length = np.append(first[1:], flat.size) - first
    long = length >= window.min()
    first, length = first[long], length[long]
    need = window[first // n]
    long = (length >= need) & ~np.isnan(flat[first])
    first, length, need = first[long], length[long], need[long]
    if first.size:
        held[first + need - 1] += 1
        held[first + length] -= 1
    return np.cumsum(held[:-1]).reshape(rows.shape) > 0


def _flat(values, points, status, run) -> np.ndarray:
    """(points x samples) true where a point has held exactly the same value for its stuck
    window while it had to move (see the module docstring)."""
    ambient = np.array([role in AMBIENT_POINTS for role in points], dtype=bool)
    running_only = np.array([role in RUNNING_ONLY_POINTS for role in points], dtype=bool)
    window = np.where(ambient, STUCK_AMBIENT_MINUTES, STUCK_MINUTES)
    flat = np.zeros(values.shape, dtype=bool)
    always = ~running_only
    flat[always] = _held(values[always], window[always])
    if running_only.any():  # their runs count running samples only
        flat[np.ix_(running_only, run)] = _held(values[running_only][:, run], window[running_only])
    must_move = ~ambient & ~running_only
    if status is not None and must_move.any():
        switches = np.zeros(len(status), dtype=bool)
        switches[1:] = np.abs(status[1:] - status[:-1]) > 0
        moved = (window_count(switches, STUCK_MINUTES) > 0) | (
            window_count(run, STUCK_MINUTES) >= STUCK_MINUTES // 2
        )
        flat[must_move] &= moved
    return flat


def _coldest_surroundings(columns: dict[str, np.ndarray]) -> np.ndarray | None:
    """The lowest air temperature around the unit per sample; NaN where none is known."""
    names = ("outdoor_air_temp", "return_air_temp", "box_temp")
    temps = [columns[c] for c in names if c in columns]
    if not temps:
        return None
    return np.fmin.reduce(temps)


def _check_standstill_drift(out, columns, standstill_mask, unit, hours, hour_index) -> None:
    pressures = [c for c in ("suction_pressure", "discharge_pressure") if c in columns]
    coldest = _coldest_surroundings(columns)
    if not pressures or coldest is None:
        return
    still = standstill_mask.to_numpy(dtype=bool)
    if not still.any():
        for role in pressures:
            unchecked = np.zeros(len(hours), dtype=bool)
            out.set_positions(finding_key("sensor_fault", f"{role}:drift"), unchecked, {})
        return
    slot = hour_index[still]
    rows = np.bincount(slot[slot >= 0], minlength=len(hours))
    series = np.array([coldest, *(columns[role] for role in pressures)])[:, still]
    (air, *medians), _ = hourly_medians(series, slot, len(hours))
    judged = (rows >= MIN_STANDSTILL_SAMPLES) & ~np.isnan(air)
    # one lookup for both pressures (the saturation temperature is taken sample by sample)
    dew = fast.saturation_temperature(
        unit.refrigerant, np.concatenate([m[judged] for m in medians]), "dew"
    )
    saturation = {}
    for role, part in zip(pressures, np.split(dew, len(pressures)), strict=True):
        saturation[role] = np.full(len(hours), np.nan)
        saturation[role][judged] = part
    for role in pressures:
        others = [saturation[o] for o in pressures if o != role]
        off_air = saturation[role] - air
        checked = judged & ~np.isnan(off_air)
        found = {}
        for k in _where(checked & (np.abs(off_air) > DRIFT_LIMIT_K)):
            deviation = off_air[k]
            if others:
                other = others[0][k]
                if not np.isfinite(other):
                    continue
                if abs(saturation[role][k] - other) <= DRIFT_LIMIT_K:
                    continue  # the two pressures agree: not this sensor
                if abs(other - air[k]) > DRIFT_AGREE_K:
                    continue  # neither pressure fits the air: no verdict about this one
                confidence = 0.9
            else:
                confidence = 0.6
            found[k] = Finding(
                float(min(1.0, abs(deviation) / 10.0)),
                confidence,
                f"{role} at standstill: saturation {deviation:+.1f} K from the coldest air "
                "temperature (should be equalised)",
            )
        out.set_positions(finding_key("sensor_fault", f"{role}:drift"), checked, found)


IMPLAUSIBLE_CHECKS = (
    # (feature, the points it names, what a value below -IMPLAUSIBLE_K means)
    ("superheat", "suction_pressure/suction_temp", "suction colder than its dew point"),
    ("subcooling", "discharge_pressure/liquid_temp", "liquid warmer than its bubble point"),
    ("discharge_superheat", "discharge_pressure/discharge_temp", "discharge below condensing"),
)


def hourly_medians(values: np.ndarray, slot: np.ndarray, n_hours: int):
    """(median, count) of the non-NaN ``values`` per hour slot 0 .. n_hours - 1 (slot -1 ignored).

    ``values`` may hold several series as rows (series x samples, one ``slot`` for all); the
    results are then series x hours. The median of an even count is the mean of the two middle
    values, as pandas computes it; NaN where an hour has no value. One sort of a series x hours x
    samples block (samples of an hour side by side).
    """
    rows = np.atleast_2d(values)
    keep = slot >= 0
    slot, rows = slot[keep], rows[:, keep]
    if np.any(slot[1:] < slot[:-1]):
        order = np.argsort(slot, kind="stable")
        slot, rows = slot[order], rows[:, order]
    sizes = np.bincount(slot, minlength=n_hours)
    block = np.full((len(rows), n_hours, max(int(sizes.max(initial=0)), 1)), np.nan)
    block[:, slot, np.arange(len(slot)) - (np.cumsum(sizes) - sizes)[slot]] = rows
    block.sort(axis=2)  # NaN last
    count = np.count_nonzero(~np.isnan(block), axis=2)
    low = np.take_along_axis(block, (np.maximum(count - 1, 0) // 2)[..., None], axis=2)[..., 0]
    high = np.take_along_axis(block, (count // 2)[..., None], axis=2)[..., 0]
    medians = np.where(count > 0, (low + high) / 2.0, np.nan)
    if np.ndim(values) == 1:
        return medians[0], count[0]
    return medians, count


def _check_implausible(out, features, steady_mask, hours) -> None:
    if not steady_mask.index.equals(features.index):
        steady_mask = steady_mask.reindex(features.index, fill_value=False)
    steady = steady_mask.to_numpy(dtype=bool)
    slot = hour_slots(features.index, hours)[steady]
    columns = columns_of(features)

    def column(name):
        return columns[name][steady]

    judged_values = [  # in the order of IMPLAUSIBLE_CHECKS
        column("superheat"),
        column("subcooling"),
        column("discharge_temp") - column("t_cond"),
    ]
    all_medians, all_sizes = hourly_medians(np.array(judged_values), slot, len(hours))
    for (feature, points, meaning), medians, sizes in zip(
        IMPLAUSIBLE_CHECKS, all_medians, all_sizes, strict=True
    ):
        judged = sizes >= MIN_IMPLAUSIBLE_SAMPLES
        found = {
            k: Finding(
                float(min(1.0, -medians[k] / 10.0)),
                0.8,
                f"{meaning}: median {feature} {medians[k]:+.1f} K in steady running",
            )
            for k in _where(judged & (medians < -IMPLAUSIBLE_K))
        }
        out.set_positions(finding_key("sensor_fault", f"{points}:implausible"), judged, found)


def faulty_points(findings: HourlyFindings) -> dict[pd.Timestamp, set[str]]:
    """Hour -> points under a sensor finding that hour (``"all"`` for a silent unit)."""
    out: dict[pd.Timestamp, set[str]] = {}
    for key, hour in findings.found:
        code, _, detail = key.partition(":")
        if code != "sensor_fault":
            continue
        point_part = detail.rsplit(":", 1)[0]
        out.setdefault(hour, set()).update(point_part.split("/"))
    return out
