"""Event lifecycle: persistence, open while found, clearing, refrigerant family."""

from __future__ import annotations

import numpy as np
import pandas as pd

from rimewatch.detect.events import cleared_after, derive_events
from rimewatch.detect.findings import Finding, HourlyFindings

HOURS = pd.date_range("2026-07-08", periods=30, freq="1h", tz="UTC")


def _findings(pattern: str, code="low_charge", samples=30, ranking=()):
    """pattern: one character per hour: F found, . checked not found, ' ' not checked."""
    findings = HourlyFindings.empty(HOURS)
    checked = np.array([c in "F." for c in pattern.ljust(len(HOURS))])
    finding = Finding(0.3, 0.8, "test", samples, ranking)
    found = {k: finding for k, c in enumerate(pattern) if c == "F"}
    findings.set_positions(code, checked, found)
    return findings


def _first(n: int) -> np.ndarray:
    """Checked mask: the first ``n`` hours."""
    return np.arange(len(HOURS)) < n


def test_two_found_hours_are_not_an_event():
    assert derive_events("u", _findings("..FF......")) == []


def test_three_hours_over_two_make_an_event_that_starts_at_the_first():
    (event,) = derive_events("u", _findings("..FFF......", samples=30))
    assert event.code == "low_charge"
    assert event.start == HOURS[2]
    assert event.detected == HOURS[4] + pd.Timedelta("1h")
    assert event.end == HOURS[4] + pd.Timedelta("1h")  # cleared after six checked hours


def test_too_few_steady_samples_is_no_event():
    assert derive_events("u", _findings("..FFF.....", samples=10)) == []


def test_unchecked_hours_neither_extend_nor_clear():
    (event,) = derive_events("u", _findings("FFF          .....F"))
    assert event.end is None  # only five checked hours without it, then found again
    assert event.last_seen == HOURS[18] + pd.Timedelta("1h")


def test_open_at_the_end_of_the_data():
    (event,) = derive_events("u", _findings("....FFFFF"))
    assert event.is_open
    assert len(event.history) == 5


def test_cleared_after_six_checked_hours():
    first, second = derive_events("u", _findings("FFF......FFF"))
    assert first.end == HOURS[3]
    assert second.start == HOURS[9] and second.is_open
    assert cleared_after(_findings("FFF......"), "low_charge", "", HOURS[3])
    assert not cleared_after(_findings("FFF....."), "low_charge", "", HOURS[3])


def test_refrigerant_codes_that_alternate_are_one_event_with_the_leading_code():
    findings = HourlyFindings.empty(HOURS)
    ranking_oc = (("overcharge", 0.6), ("non_condensables", 0.4))
    ranking_nc = (("non_condensables", 0.55), ("overcharge", 0.45))
    findings.set_positions(
        "overcharge", _first(6), {k: Finding(0.4, 0.6, "", 30, ranking_oc) for k in (0, 2, 4)}
    )
    findings.set_positions(
        "non_condensables",
        _first(6),
        {k: Finding(0.4, 0.55, "", 30, ranking_nc) for k in (1, 3, 5)},
    )
    (event,) = derive_events("u", findings)
    assert event.code == "overcharge"  # 0.6+0.45+0.6 > 0.4+0.55+0.4 over the first three hours
    assert event.start == HOURS[0]
    assert dict(event.ranking)["overcharge"] > dict(event.ranking)["non_condensables"]


def test_sensor_findings_are_separate_events_per_point_and_kind():
    findings = _findings("FFFF", code="sensor_fault:liquid_temp:stuck", samples=0)
    findings.merge(_findings("..FFFF", code="sensor_fault:suction_temp:drift", samples=0))
    events = derive_events("u", findings)
    assert [(e.code, e.detail) for e in events] == [
        ("sensor_fault", "liquid_temp:stuck"),
        ("sensor_fault", "suction_temp:drift"),
    ]


def test_event_impact_is_the_recent_one():
    findings = HourlyFindings.empty(HOURS)
    found = {
        k: Finding(0.3, 0.8, "", 30, (), {"capacity_loss_pct": float(k), "cost_per_day": 0.1 * k})
        for k in range(20)
    }
    findings.set_positions("low_charge", _first(20), found)
    (event,) = derive_events("u", findings)
    # a growing fault: the median of the last six hours (14..19), not of all twenty
    assert event.impact["capacity_loss_pct"] == 16.5
