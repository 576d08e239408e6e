"""The event lifecycle: from hourly findings to events that open, persist and clear.

A finding becomes an event only after it persists, so one odd hour never reaches anybody:

* **open**: found in at least ``min_found_hours`` hours, resting on at least
  ``min_steady_samples`` steady one-minute samples in total, with at least ``min_span_hours``
  between the first and the last of those hours. The event starts at the first found hour (its
  key is unit, code, detail, start); ``detected`` is the end of the hour that met the rule.
* **stays open** while the finding keeps being found; hours that could not be checked (unit off,
  no steady data, a sensor it depends on faulty) neither extend nor clear it.
* **clears** after ``clear_after_hours`` checked hours in a row without the finding; its end is
  the end of the last found hour. At the end of the data an uncleared event is open (end None).
* A candidate that never met the rule is forgotten after ``forget_after_hours`` without a find.

Refrigerant faults form one family: an hour's top-ranked fault may change between neighbouring
hours (overcharge one hour, non-condensables the next) while the unit is plainly faulty, so the
family persists as one event. Its code is the fault with the largest summed probability over
the found hours up to the moment the event opened, and stays fixed (a stored event's key never
changes); the ranking and confidence keep being updated from all found hours.

An event's impact is the median over its last ``RECENT_IMPACT_HOURS`` (6) found hours, so a
growing fault shows what it costs now; its severity is the largest seen.

Defaults (ours): 3 hours, 60 steady samples, 2 hours span, clear after 6 checked hours. Sensor
findings need no steady samples; ``offline`` needs ``OFFLINE_MIN_HOURS`` (6) found hours, so a
logger outage of a few hours is a gap, not a fault.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from rimewatch.detect.diagnose import REFRIGERANT_FAULTS, severity_label
from rimewatch.detect.findings import HourlyFindings, split_key
from rimewatch.detect.quality import OFFLINE_MIN_HOURS

HOUR = pd.Timedelta("1h")
REFRIGERANT_FAMILY = "refrigerant"
RECENT_IMPACT_HOURS = 6


@dataclass(frozen=True)
class EventPolicy:
    """Persistence rules; see the module docstring."""

    min_found_hours: int = 3
    min_steady_samples: int = 60
    min_span_hours: float = 2.0
    clear_after_hours: int = 6
    forget_after_hours: int = 72


REFRIGERANT_POLICY = EventPolicy()
SENSOR_POLICY = EventPolicy(min_steady_samples=0)
OFFLINE_POLICY = EventPolicy(min_found_hours=OFFLINE_MIN_HOURS, min_steady_samples=0)


@dataclass
class Event:
    """A fault event of one unit (times UTC; ``end`` None while open)."""

    unit: str
    code: str
    detail: str
    start: pd.Timestamp
    end: pd.Timestamp | None
    detected: pd.Timestamp
    last_seen: pd.Timestamp
    severity: float
    confidence: float
    impact: dict = field(default_factory=dict)
    ranking: list = field(default_factory=list)
    evidence: str = ""
    history: list = field(default_factory=list)  # [(hour, severity, confidence)]

    @property
    def severity_label(self) -> str:
        return severity_label(self.severity)

    @property
    def is_open(self) -> bool:
        return self.end is None


def _policy_for(key: str) -> EventPolicy:
    if key == REFRIGERANT_FAMILY:
        return REFRIGERANT_POLICY
    return OFFLINE_POLICY if key.endswith(":offline") else SENSOR_POLICY


def _family_columns(findings: HourlyFindings, found_only: bool = False) -> dict[str, np.ndarray]:
    """Status per hour to follow: the refrigerant family combined, every sensor key on its own
    (``found_only``: only those found in some hour)."""
    columns = findings.columns
    arrays = {}
    codes = [c for c in REFRIGERANT_FAULTS if c in columns]
    if codes:  # the largest status of the family's codes; NaN only where none was checked
        arrays[REFRIGERANT_FAMILY] = np.fmax.reduce([columns[c] for c in codes])
    for key, column in columns.items():
        if key not in REFRIGERANT_FAULTS:
            arrays[key] = column
    if found_only and arrays:
        found = (np.array(list(arrays.values())) == 1.0).any(axis=1).tolist()
        return {k: v for (k, v), hit in zip(arrays.items(), found, strict=True) if hit}
    return arrays


def _found_at(findings: HourlyFindings, key: str, hour):
    if key != REFRIGERANT_FAMILY:
        return key, findings.found.get((key, hour))
    for code in REFRIGERANT_FAULTS:
        finding = findings.found.get((code, hour))
        if finding is not None:
            return code, finding
    return None, None


def derive_events(unit: str, findings: HourlyFindings) -> list[Event]:
    """Every event the hourly findings of one unit support, in order of start."""
    events = []
    columns = _family_columns(findings, found_only=True)
    if not columns:
        return events
    stamps = findings.hours
    if not stamps.is_monotonic_increasing:  # follow the hours in order
        order = np.argsort(stamps.asi8, kind="stable")
        stamps, columns = stamps[order], {key: status[order] for key, status in columns.items()}
    hours = (stamps.as_unit("ns").asi8, stamps)
    for key, status in columns.items():
        events.extend(_episodes(unit, key, status, hours, findings, _policy_for(key)))
    return sorted(events, key=lambda e: (e.start, e.code, e.detail))


def _episodes(unit, key, status: np.ndarray, hours, findings, policy: EventPolicy) -> list[Event]:
    """Events of one key; ``status`` per hour of ``hours`` (UTC nanoseconds, DatetimeIndex)."""
    nanoseconds, stamps = hours
    forget_ns = policy.forget_after_hours * HOUR.value
    events: list[Event] = []
    found: list = []  # [(hour, code, finding)]
    last_found_ns = 0
    opened_code = None
    detected = None
    negatives = 0
    for k, value in enumerate(status.tolist()):
        if math.isnan(value):
            if found and opened_code is None and nanoseconds[k] - last_found_ns > forget_ns:
                found = []
            continue
        if value == 1.0:
            hour = stamps[k]
            code, finding = _found_at(findings, key, hour)
            if finding is None:
                continue
            found.append((hour, code, finding))
            last_found_ns = nanoseconds[k]
            negatives = 0
            if opened_code is None and _qualifies(found, policy):
                opened_code = _leading_code(found) if key == REFRIGERANT_FAMILY else code
                detected = hour + HOUR
            continue
        negatives += 1
        if found and negatives >= policy.clear_after_hours:
            if opened_code is not None:
                events.append(_event(unit, key, opened_code, found, detected, closed=True))
            found, opened_code, detected, negatives = [], None, None, 0
    if found and opened_code is not None:
        events.append(_event(unit, key, opened_code, found, detected, closed=False))
    return events


def _qualifies(found: list, policy: EventPolicy) -> bool:
    if len(found) < policy.min_found_hours:
        return False
    samples = sum(f.steady_samples for _, _, f in found)
    span = (found[-1][0] - found[0][0]) / HOUR
    return samples >= policy.min_steady_samples and span >= policy.min_span_hours


def _ranking(found: list) -> list[tuple[str, float]]:
    totals: dict[str, float] = {}
    for _, code, finding in found:
        pairs = finding.ranking or ((code, finding.confidence),)
        for name, share in pairs:
            totals[name] = totals.get(name, 0.0) + share
    n = len(found)
    return sorted(((c, round(s / n, 3)) for c, s in totals.items()), key=lambda cs: -cs[1])


def _leading_code(found: list) -> str:
    return _ranking(found)[0][0]


def _recent_impact(found: list) -> dict:
    """Median impact over the last ``RECENT_IMPACT_HOURS`` found hours: what the fault costs now
    (a fault that grows would read too low as a median over its whole life)."""
    impacts = [f.impact for _, _, f in found if f.impact][-RECENT_IMPACT_HOURS:]
    if not impacts:
        return {}
    return {k: round(float(np.median([i[k] for i in impacts if k in i])), 2) for k in impacts[-1]}


def _event(unit, key, code, found, detected, closed: bool) -> Event:
    if key == REFRIGERANT_FAMILY:
        detail, ranking = "", _ranking(found)
        confidence = dict(ranking)[code]
    else:
        code, detail = split_key(key)
        ranking, confidence = [], float(np.mean([f.confidence for _, _, f in found]))
    last_hour, _, last = found[-1]
    return Event(
        unit=unit,
        code=code,
        detail=detail,
        start=found[0][0],
        end=last_hour + HOUR if closed else None,
        detected=detected,
        last_seen=last_hour + HOUR,
        severity=round(max(f.severity for _, _, f in found), 3),
        confidence=round(confidence, 3),
        impact=_recent_impact(found),
        ranking=ranking,
        evidence=last.evidence,
        history=[(h, round(f.severity, 3), round(f.confidence, 3)) for h, _, f in found],
    )


def cleared_after(findings: HourlyFindings, code: str, detail: str, last_seen) -> bool:
    """Whether a stored open event (code, detail, last found hour ending at ``last_seen``) has
    cleared in these findings: enough checked hours after it without the finding."""
    key = REFRIGERANT_FAMILY if code in REFRIGERANT_FAULTS else f"{code}:{detail}"
    column = _family_columns(findings).get(key)
    if column is None:
        return False
    status = pd.Series(column, index=findings.hours)
    after = status[status.index >= pd.Timestamp(last_seen)].dropna()
    if (after == 1.0).any():
        return False
    return len(after) >= _policy_for(key).clear_after_hours
