"""`rimewatch simulate`: files that the rest of rimewatch reads, and MQTT publishing."""

import json
import threading

import pandas as pd
import pytest
from click.testing import CliRunner

from rimewatch.cli import main
from rimewatch.site import load_site


def test_writes_csv_site_and_ground_truth(tmp_path):
    out = tmp_path / "data"
    result = CliRunner().invoke(
        main,
        ["simulate", "--days", "1", "--seed", "3", "--out", str(out), "--display-units", "IP",
         "--fault", "evaporator_airflow_low:severity=0.3:onset=2026-07-01T12:00"],
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    site = load_site(out / "site.yaml")  # the store's own validator
    unit = site.units[0]
    frame = pd.read_csv(out / "rtu-1.csv")
    assert {p.csv_column for p in unit.points} <= set(frame.columns)
    assert unit.point("suction_pressure").unit == "psig"
    assert len(frame) == 1440
    truth = json.loads((out / "ground_truth.json").read_text())
    assert truth["faults"][0]["code"] == "evaporator_airflow_low"
    assert truth["daily"][0]["capacity_loss_pct"] > 0


def test_bad_fault_is_one_clear_line(tmp_path):
    result = CliRunner().invoke(
        main, ["simulate", "--days", "1", "--out", str(tmp_path), "--fault", "low_charge:oops"]
    )
    assert result.exit_code != 0
    assert "expected key=value" in result.output
    assert "Traceback" not in result.output


@pytest.mark.mqtt
def test_publishes_to_a_real_broker(mosquitto, tmp_path):
    import paho.mqtt.client as mqtt
    from paho.mqtt.enums import CallbackAPIVersion

    received = []
    ready = threading.Event()
    sub = mqtt.Client(CallbackAPIVersion.VERSION2, client_id="sim-test-sub")
    sub.on_connect = lambda c, u, f, rc, p: (c.subscribe("#", qos=1), ready.set())
    sub.on_message = lambda c, u, m: received.append((m.topic, json.loads(m.payload)))
    sub.connect(mosquitto.host, mosquitto.port)
    sub.loop_start()
    assert ready.wait(5)
    result = CliRunner().invoke(
        main,
        ["simulate", "--days", "0.01", "--clean", "--out", str(tmp_path),
         "--mqtt", f"{mosquitto.host}:{mosquitto.port}", "--speed", "0"],
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    for _ in range(50):
        if len(received) >= 14 * 14:
            break
        threading.Event().wait(0.1)
    sub.loop_stop()
    sub.disconnect()
    topics = {topic for topic, _ in received}
    assert "harbourside-depot/rtu-1/suction_pressure" in topics
    assert len(received) == 14 * 14  # 14 points x 14 minutes
    assert all(set(payload) == {"value", "ts"} for _, payload in received)
