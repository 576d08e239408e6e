"""Findings: what the checks saw, hour by hour, before the event lifecycle decides what to raise.

A finding key is ``"code"`` or ``"code:detail"`` (``"sensor_fault:suction_temp:stuck"``). For each
key and UTC hour the status is 1 (found), 0 (checked, not found) or NaN (could not be checked:
no steady data, the unit off, a sensor it depends on faulty). Found hours carry a
:class:`Finding` with the numbers behind them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class Finding:
    """What one check found in one hour.

    Attributes
    ----------
    severity : 0..1 strength of the finding (the event keeps its largest and its history).
    confidence : 0..1 how sure the check is of this finding (for a diagnosis: the posterior of
        the named fault among the candidates).
    evidence : one readable line with the numbers.
    steady_samples : one-minute samples the finding rests on.
    ranking : for a diagnosis, ``[(code, probability), ...]`` best first.
    impact : capacity_loss_pct, extra_power_pct, extra_kwh_per_day, cost_per_day (when known).
    """

    severity: float
    confidence: float
    evidence: str
    steady_samples: int = 0
    ranking: tuple = ()
    impact: dict = field(default_factory=dict)


def finding_key(code: str, detail: str = "") -> str:
    return f"{code}:{detail}" if detail else code


def split_key(key: str) -> tuple[str, str]:
    """``"sensor_fault:suction_temp:stuck"`` -> ``("sensor_fault", "suction_temp:stuck")``."""
    code, _, detail = key.partition(":")
    return code, detail


@dataclass
class HourlyFindings:
    """Status per finding key and UTC hour, and the findings of the found hours."""

    hours: pd.DatetimeIndex
    columns: dict[str, np.ndarray]
    found: dict[tuple[str, pd.Timestamp], Finding]
    steady_samples: pd.Series  # steady one-minute samples per hour

    @classmethod
    def empty(cls, hours: pd.DatetimeIndex) -> HourlyFindings:
        return cls(hours, {}, {}, pd.Series(0, index=hours, dtype=int))

    @property
    def status(self) -> pd.DataFrame:
        """1 found, 0 checked and not found, NaN not checked (hours x keys)."""
        return pd.DataFrame(self.columns, index=self.hours)

    def set_positions(self, key: str, checked: np.ndarray, found: dict[int, Finding]) -> None:
        """Record a check: a boolean mask of the hours checked (over ``hours``), and position in
        ``hours`` -> Finding for the hours found."""
        column = np.where(checked, 0.0, np.nan)
        for k, finding in found.items():
            column[k] = 1.0
            self.found[(key, self.hours[k])] = finding
        self.columns[key] = column

    def merge(self, other: HourlyFindings) -> None:
        same_hours = other.hours.equals(self.hours)
        for key, column in other.columns.items():
            if same_hours:
                self.columns[key] = column.copy()
            else:
                reindexed = pd.Series(column, index=other.hours).reindex(self.hours)
                self.columns[key] = reindexed.to_numpy()
        self.found.update(other.found)
