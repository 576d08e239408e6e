"""Detection's tables on real SQLite files and, when reachable, a real PostgreSQL server."""

from __future__ import annotations

import pytest
from sqlalchemy import func, select

from rimewatch.store import connect
from rimewatch.store.events import (
    EventHistory,
    IncomingEvent,
    acknowledge_event,
    active_baseline,
    add_note,
    close_event,
    list_events,
    merge_events,
    notes_for,
    save_baseline,
    set_maintenance,
)
from rimewatch.store.schema import Site, Unit

pytest_plugins = ["db_backends"]

HOUR_MS = 3_600_000
T0 = 1_783_382_400_000  # 2026-07-07T00:00:00Z


def _unit(engine, key="rtu-1") -> int:
    with engine.begin() as conn:
        site_id = conn.execute(select(Site.id).where(Site.name == "Birchwood Clinic")).scalar()
        if site_id is None:
            site_id = conn.execute(
                Site.__table__.insert().values(
                    name="Birchwood Clinic", timezone="UTC", elevation_m=0.0, display_units="SI"
                )
            ).inserted_primary_key[0]
        return conn.execute(
            Unit.__table__.insert().values(
                site_id=site_id,
                key=key,
                name=key,
                kind="rooftop_unit",
                refrigerant="R410A",
                description="{}",
                retired=False,
            )
        ).inserted_primary_key[0]


def _event(start_h=0, end_h=None, last_h=5, severity=0.4, code="low_charge", detail=""):
    return IncomingEvent(
        code=code,
        detail=detail,
        start_ms=T0 + start_h * HOUR_MS,
        end_ms=None if end_h is None else T0 + end_h * HOUR_MS,
        detected_ms=T0 + (start_h + 3) * HOUR_MS,
        last_seen_ms=T0 + last_h * HOUR_MS,
        severity=severity,
        confidence=0.9,
        impact={"capacity_loss_pct": 8.0},
        ranking=[["low_charge", 0.9], ["compressor_valve_leakage", 0.1]],
        evidence="residuals subcooling -4.2",
        history=tuple((T0 + h * HOUR_MS, severity, 0.9) for h in range(start_h, last_h)),
    )


def _history_rows(engine) -> int:
    with engine.connect() as conn:
        return conn.execute(select(func.count()).select_from(EventHistory)).scalar()


def test_merge_is_idempotent_and_extends_overlapping_events(db_url):
    engine = connect(db_url)
    unit_id = _unit(engine)
    first = merge_events(engine, unit_id, [_event()])
    assert (first.inserted, first.updated, first.unchanged) == (1, 0, 0)
    again = merge_events(engine, unit_id, [_event()])
    assert (again.inserted, again.updated, again.unchanged) == (0, 0, 1)
    assert _history_rows(engine) == 5
    # a later window that starts inside the stored event extends it; key and start stay
    later = merge_events(engine, unit_id, [_event(start_h=3, last_h=9, severity=0.6)])
    assert (later.inserted, later.updated) == (0, 1)
    (row,) = list_events(engine, [unit_id])
    assert row["start_ms"] == T0 and row["severity"] == 0.6
    assert row["last_seen_ms"] == T0 + 9 * HOUR_MS and row["end_ms"] is None
    assert row["impact"] == {"capacity_loss_pct": 8.0} and row["ranking"][0] == ["low_charge", 0.9]
    assert _history_rows(engine) == 9
    # a separate episode after the first one closed is a second event
    assert close_event(engine, row["id"], T0 + 9 * HOUR_MS) == 1
    assert close_event(engine, row["id"], T0 + 9 * HOUR_MS) == 0
    separate = merge_events(engine, unit_id, [_event(start_h=30, last_h=34)])
    assert separate.inserted == 1
    assert len(list_events(engine, [unit_id])) == 2
    assert len(list_events(engine, [unit_id], open_only=True)) == 1


def test_acknowledge_notes_and_maintenance(db_url):
    engine = connect(db_url)
    unit_id = _unit(engine)
    merge_events(engine, unit_id, [_event()])
    (row,) = list_events(engine)
    assert acknowledge_event(engine, row["id"], "Priya Nair", T0 + 10 * HOUR_MS)
    assert not acknowledge_event(engine, 999_999, "Priya Nair", T0)
    add_note(engine, row["id"], "Priya Nair", "gauges on: suction 7.9 bar; leak search booked", T0)
    with pytest.raises(LookupError):
        add_note(engine, 999_999, "x", "y", T0)
    assert notes_for(engine, [row["id"]])[row["id"]][0]["author"] == "Priya Nair"
    (row,) = list_events(engine)
    assert row["acknowledged_by"] == "Priya Nair"

    assert set_maintenance(engine, unit_id, True, T0 + 20 * HOUR_MS, "leak repair")
    assert not set_maintenance(engine, unit_id, True, T0 + 21 * HOUR_MS)
    assert list_events(engine) == []  # the open event is suppressed
    merge_events(engine, unit_id, [_event(code="sensor_fault", detail="liquid_temp:stuck",
                                          start_h=22, last_h=26)])  # fmt: skip
    suppressed = list_events(engine, include_suppressed=True)
    assert len(suppressed) == 2 and all(e["suppressed"] for e in suppressed)
    # closed during maintenance: stays suppressed; still open afterwards: shown again
    (stuck,) = [e for e in suppressed if e["code"] == "sensor_fault"]
    close_event(engine, stuck["id"], T0 + 26 * HOUR_MS)
    assert set_maintenance(engine, unit_id, False, T0 + 30 * HOUR_MS)
    assert [e["code"] for e in list_events(engine)] == ["low_charge"]


def test_baselines_keep_one_active(db_url):
    engine = connect(db_url)
    unit_id = _unit(engine)
    assert active_baseline(engine, unit_id) is None
    save_baseline(engine, unit_id, {"version": 1, "n": 1}, T0, T0 + HOUR_MS, T0)
    save_baseline(engine, unit_id, {"version": 1, "n": 2}, T0, T0 + 2 * HOUR_MS, T0)
    assert active_baseline(engine, unit_id) == {"version": 1, "n": 2}
