"""The MQTT ingester end to end: a real Mosquitto, a real `rimewatch listen` process, a real SQLite
file. Nothing may be lost or stored twice through crashes, broker restarts and garbage payloads."""

from __future__ import annotations

import itertools
import json
import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import paho.mqtt.client as mqtt
import pytest
import yaml
from paho.mqtt.enums import CallbackAPIVersion
from paho.mqtt.packettypes import PacketTypes
from paho.mqtt.properties import Properties
from sqlalchemy import text

from rimewatch.ingest.mqtt import Ingester, MqttSettings, StoreSink, subscription_filters
from rimewatch.ingest.payload import MAX_ABS_VALUE, decoder_for_points
from rimewatch.site import parse_site
from rimewatch.site_sync import apply_site
from rimewatch.store import active_points, connect, pending_quarantine

pytest_plugins = ["db_backends"]

# Reading i is at BASE_MS + i [ms]: an hour ago, inside the decoder's age limit.
BASE_MS = (int(time.time()) - 3600) * 1000
_ids = itertools.count()


def fresh_prefix() -> str:
    """A topic prefix and client id per test, so tests sharing a broker never see each other."""
    return f"t{os.getpid()}-{next(_ids)}"


def site_document(prefix: str) -> dict:
    """One unit: suction pressure in kPa(g) on an exact topic (the numbered readings), outdoor air
    in degC on a wildcard topic, and return air on a topic full of SQL syntax."""
    return {
        "site": {"name": f"O'Hara's \"Quay\"; Deli -- {prefix}", "timezone": "UTC"},
        "units": [
            {
                "id": "rtu-1",
                "name": "Deli rooftop unit",
                "kind": "rooftop_unit",
                "refrigerant": "R410A",
                "expansion_device": "txv",
                "nominal_capacity_kW": 20,
                "points": [
                    {
                        "role": "suction_pressure",
                        "unit": "kPa(g)",
                        "mqtt_topic": f"{prefix}/rtu-1/ps",
                    },
                    {"role": "outdoor_air_temp", "unit": "degC", "mqtt_topic": f"{prefix}/+/oat"},
                    {
                        "role": "return_air_temp",
                        "unit": "degC",
                        "mqtt_topic": f"{prefix}/o'brien\"; DROP TABLE readings;--",
                    },
                ],
            }
        ],
    }


def write_site(path: Path, prefix: str) -> None:
    path.write_text(yaml.safe_dump(site_document(prefix)))


class Listener:
    """`rimewatch listen` as a child process, with its log in a file."""

    def __init__(self, tmp_path: Path, broker, prefix: str, *extra: str):
        self.site = tmp_path / "site.yaml"
        if not self.site.exists():
            write_site(self.site, prefix)
        self.db = tmp_path / "plant.db"
        self.log = tmp_path / "listen.log"
        self.args = [
            str(Path(sys.executable).with_name("rimewatch")),
            "listen",
            str(self.site),
            "--broker",
            f"{broker.host}:{broker.port}",
            "--db",
            f"sqlite:///{self.db}",
            "--client-id",
            f"ingest-{prefix}",
            "--stats-interval",
            "1",
            *extra,
        ]
        self.process: subprocess.Popen | None = None
        self.starts = 0

    def start(self, timeout_s: float = 30.0) -> None:
        offset = self.log.stat().st_size if self.log.exists() else 0
        with self.log.open("ab") as log:
            self.process = subprocess.Popen(self.args, stdout=log, stderr=log)
        self.starts += 1
        end = time.monotonic() + timeout_s
        while time.monotonic() < end:
            if "subscribed to" in self.log.read_text(errors="replace")[offset:]:
                return
            if self.process.poll() is not None:
                break
            time.sleep(0.05)
        raise AssertionError(f"listener did not subscribe:\n{self.log.read_text()[offset:]}")

    def wait_for_log(self, text: str, count: int, timeout_s: float = 20.0) -> None:
        end = time.monotonic() + timeout_s
        while self.log.read_text(errors="replace").count(text) < count:
            assert time.monotonic() < end, f"{text!r} not {count} times in the log"
            time.sleep(0.05)

    def kill(self) -> None:
        self.process.send_signal(signal.SIGKILL)
        self.process.wait(10)

    def terminate(self) -> int:
        self.process.send_signal(signal.SIGTERM)
        return self.process.wait(30)

    def close(self) -> None:
        if self.process is not None and self.process.poll() is None:
            self.process.kill()
            self.process.wait(10)


@pytest.fixture
def listener_factory(tmp_path):
    made = []

    def make(broker, prefix, *extra):
        listener = Listener(tmp_path, broker, prefix, *extra)
        made.append(listener)
        return listener

    yield make
    for listener in made:
        listener.close()


def publish(broker, items, qos=1) -> None:
    """Publish (topic, payload) pairs and wait until the broker has acknowledged every one."""
    client = mqtt.Client(CallbackAPIVersion.VERSION2, protocol=mqtt.MQTTv5)
    client.max_queued_messages_set(0)
    client.connect(broker.host, broker.port)
    client.loop_start()
    try:
        pending = []
        for topic, payload in items:
            pending.append(client.publish(topic, payload, qos=qos))
            if len(pending) >= 1000:
                for info in pending:
                    info.wait_for_publish(10)
                pending.clear()
        for info in pending:
            info.wait_for_publish(10)
            assert info.is_published()
    finally:
        client.disconnect()
        client.loop_stop()


def numbered(prefix: str, numbers) -> list[tuple[str, bytes]]:
    """Reading i: suction pressure i kPa(g) at BASE_MS + i ms, as a JSON object."""
    return [
        (f"{prefix}/rtu-1/ps", json.dumps({"value": i, "ts": BASE_MS + i}).encode())
        for i in numbers
    ]


def stored_numbers(db: Path) -> list[int]:
    with sqlite3.connect(db) as conn:
        rows = conn.execute(
            "SELECT r.ts_ms, r.value FROM readings r JOIN points p ON p.id = r.point_id "
            "WHERE p.role = 'suction_pressure' ORDER BY r.ts_ms"
        ).fetchall()
    # kPa gauge -> Pa absolute: value = i * 1000 + 101325 (ISO 2533 sea level)
    for ts_ms, value in rows:
        assert value == pytest.approx((ts_ms - BASE_MS) * 1000.0 + 101325.0)
    return [ts_ms - BASE_MS for ts_ms, _ in rows]


def wait_for_count(db: Path, count: int, timeout_s: float = 20.0) -> list[int]:
    end = time.monotonic() + timeout_s
    numbers: list[int] = []
    while time.monotonic() < end:
        if db.exists():
            try:
                numbers = stored_numbers(db)
            except sqlite3.OperationalError:  # schema not there yet
                numbers = []
            if len(numbers) >= count:
                return numbers
        time.sleep(0.1)
    return numbers


def quarantine_rows(db: Path) -> list[tuple[str, bytes, str]]:
    with sqlite3.connect(db) as conn:
        return conn.execute("SELECT origin, payload, reason FROM quarantine ORDER BY id").fetchall()


@pytest.mark.mqtt
def test_sigterm_commits_and_acknowledges_everything_it_received(mosquitto, listener_factory):
    """SIGTERM in the middle of a stream: what was stored was acknowledged (the broker does not send
    it again), and what was not stored is still queued at the broker: together exactly N."""
    prefix = fresh_prefix()
    total = 2000
    listener = listener_factory(mosquitto, prefix)
    listener.start()
    publish(mosquitto, numbered(prefix, range(total)))
    listener.process.send_signal(signal.SIGTERM)  # while it is still draining the backlog
    assert listener.process.wait(30) == 0
    stored = set(stored_numbers(listener.db))
    # Resume the same session with a plain client: it gets only what was never acknowledged.
    redelivered = drain_session(mosquitto, f"ingest-{prefix}")
    assert stored.isdisjoint(redelivered)
    assert stored | redelivered == set(range(total))


def drain_session(broker, client_id: str, quiet_s: float = 1.0) -> set[int]:
    received: set[int] = set()
    last = [time.monotonic()]

    def on_message(client, userdata, message):
        received.add(json.loads(message.payload)["ts"] - BASE_MS)
        last[0] = time.monotonic()

    client = mqtt.Client(CallbackAPIVersion.VERSION2, client_id=client_id, protocol=mqtt.MQTTv5)
    client.on_message = on_message
    properties = Properties(PacketTypes.CONNECT)
    properties.SessionExpiryInterval = 60
    client.connect(broker.host, broker.port, clean_start=False, properties=properties)
    client.loop_start()
    while time.monotonic() - last[0] < quiet_s:
        time.sleep(0.05)
    client.disconnect()
    client.loop_stop()
    return received


@pytest.mark.mqtt
def test_sigkill_and_restart_lose_nothing_and_duplicate_nothing(mosquitto, listener_factory):
    prefix = fresh_prefix()
    total, chunk = 2000, 500
    listener = listener_factory(mosquitto, prefix)
    listener.start()
    chunks = [range(first, first + chunk) for first in range(0, total, chunk)]
    publish(mosquitto, numbered(prefix, chunks[0]))
    listener.kill()  # mid-stream: some of the chunk stored, some held in memory, some queued
    publish(mosquitto, numbered(prefix, chunks[1]))  # while the ingester is down
    listener.start()
    publish(mosquitto, numbered(prefix, chunks[2]))
    publish(mosquitto, numbered(prefix, chunks[3]))
    numbers = wait_for_count(listener.db, total)
    assert listener.terminate() == 0
    assert numbers == list(range(total))  # exactly N distinct readings: none lost, none twice
    assert listener.starts == 2
    assert "session present: True" in listener.log.read_text()


@pytest.mark.mqtt
def test_broker_restarts_lose_nothing(mosquitto_restartable, listener_factory):
    broker = mosquitto_restartable
    prefix = fresh_prefix()
    total, chunk = 2000, 500
    listener = listener_factory(broker, prefix)
    listener.start()
    for restarts, first in enumerate(range(0, total, chunk)):
        publish(broker, numbered(prefix, range(first, first + chunk)))
        if first < total - chunk:
            broker.restart()  # while the ingester holds unacknowledged messages
            listener.wait_for_log("session present: True", restarts + 1)
    numbers = wait_for_count(listener.db, total, timeout_s=30)
    assert listener.terminate() == 0
    assert numbers == list(range(total))


@pytest.mark.mqtt
def test_malformed_flood_is_quarantined_and_valid_readings_around_it_stored(
    mosquitto, listener_factory
):
    prefix = fresh_prefix()
    listener = listener_factory(
        mosquitto, prefix, "--batch-topic", f"{prefix}/#", "--max-payload-bytes", "2000"
    )
    listener.start()
    ps = f"{prefix}/rtu-1/ps"
    bad = [
        (ps, b"{not json"),
        (ps, b"hello"),
        (ps, b'"12.5"'),
        (ps, b'{"value": "12.5"}'),
        (ps, b'{"value": NaN}'),
        (ps, b"NaN"),
        (ps, b'{"value": Infinity}'),
        (ps, b"-inf"),
        (ps, b"1e400"),
        (ps, str(MAX_ABS_VALUE * 10).encode()),
        (ps, b'{"value": 1' + b"0" * 400 + b"}"),
        (ps, b'{"value": [1, 2]}'),
        (ps, b'{"value": true}'),
        (ps, b"\xff\xfe\xfd"),
        (ps, b"1" * 5000),  # oversize
        (f"{prefix}/unknown/topic", b"12.5"),
        (f"{prefix}/rtu-1/'; DELETE FROM readings; --", b"1"),
        (f"{prefix}/batch", b'[{"point": "rtu-1/nope", "value": 1}]'),
    ]
    valid = numbered(prefix, range(400))
    stream = []
    for i, message in enumerate(valid):
        stream.append(message)
        if i % 20 == 0:
            stream.append(bad[(i // 20) % len(bad)])
    bad_count = len(stream) - len(valid)
    assert bad_count == 20  # every kind of bad payload at least once
    stream += [
        (f"{prefix}/rtu-9/oat", b"21.5"),  # a wildcard point topic
        (f"{prefix}/o'brien\"; DROP TABLE readings;--", b'{"value": 24.0}'),
    ]
    publish(mosquitto, stream)
    assert wait_for_count(listener.db, 400) == list(range(400))
    assert listener.terminate() == 0
    with sqlite3.connect(listener.db) as conn:
        others = dict(
            conn.execute(
                "SELECT p.role, r.value FROM readings r JOIN points p ON p.id = r.point_id "
                "WHERE p.role != 'suction_pressure'"
            ).fetchall()
        )
    # 21.5 degC and 24.0 degC in kelvin (T/K = t/degC + 273.15, SI brochure)
    assert others == {
        "outdoor_air_temp": pytest.approx(294.65),
        "return_air_temp": pytest.approx(297.15),
    }
    assert "SIGTERM received" in listener.log.read_text()
    assert f"stopped: messages={len(stream)} stored=402" in listener.log.read_text()
    rows = quarantine_rows(listener.db)
    assert len(rows) == bad_count
    assert all(reason for _, _, reason in rows)
    reasons = " | ".join(reason for _, _, reason in rows)
    for expected in (
        "invalid JSON",
        "is not a number",
        "not a finite number",
        "implausibly large",
        "got a string",
        "exceeds the limit of 2000 bytes",
        "matches no point",
        "not UTF-8",
        "is not in the site file",
    ):
        assert expected in reasons
    assert (f"{prefix}/rtu-1/'; DELETE FROM readings; --", b"1") in [r[:2] for r in rows]


def test_settings_from_environment():
    env = {
        "RIMEWATCH_MQTT_USERNAME": "ingest",
        "RIMEWATCH_MQTT_PASSWORD": "s3cret",
        "RIMEWATCH_MQTT_CA_FILE": "/etc/rimewatch/ca.pem",
    }
    settings = MqttSettings.from_env(env, client_id="x")
    assert (settings.username, settings.password, settings.client_id) == ("ingest", "s3cret", "x")
    assert settings.tls and settings.ca_file == "/etc/rimewatch/ca.pem"
    assert "s3cret" not in repr(settings)
    assert MqttSettings.from_env({"RIMEWATCH_MQTT_TLS": "true"}).tls
    assert not MqttSettings.from_env({}).tls


def test_batch_larger_than_the_inflight_window_refused():
    # library-notes section 1: a batch waiting for more than ReceiveMaximum messages deadlocks
    with pytest.raises(ValueError, match="receive_maximum"):
        MqttSettings(receive_maximum=100, batch_max_messages=200)


def test_overlapping_filters_subscribed_once():
    assert subscription_filters(["a/b/c", "a/+/d", "x/y", "a/#"], ["a/#"]) == ["x/y", "a/#"]
    assert subscription_filters(["a/#"], ["a/+"]) == ["a/#", "a/+"]


def ingester_for(url: str, prefix: str, settings: MqttSettings) -> tuple[Ingester, object]:
    engine = connect(url)
    apply_site(engine, parse_site(site_document(prefix)))
    points = active_points(engine, site=site_document(prefix)["site"]["name"])
    sink = StoreSink(engine, points[0].site_id)
    return Ingester(settings, decoder_for_points(points), sink), engine


def wait_until(condition, timeout_s: float = 15.0) -> bool:
    end = time.monotonic() + timeout_s
    while not condition():
        if time.monotonic() > end:
            return False
        time.sleep(0.02)
    return True


@pytest.mark.mqtt
def test_ingester_in_process_on_each_database(db_url, mosquitto):
    """The same code path on SQLite and PostgreSQL (the latter skipped loudly when unreachable)."""
    prefix = fresh_prefix()
    settings = MqttSettings(host=mosquitto.host, port=mosquitto.port, client_id=f"ingest-{prefix}")
    ingester, engine = ingester_for(db_url, prefix, settings)
    ingester.start()
    try:
        assert ingester.subscribed.wait(10)
        messages = numbered(prefix, range(300))
        publish(mosquitto, [*messages, (f"{prefix}/rtu-1/ps", b"not a number")])
        publish(mosquitto, messages[:50])  # a sender repeating itself stores nothing twice
        assert wait_until(lambda: ingester.stats.messages == 351)
    finally:
        assert ingester.stop()
    with engine.connect() as conn:
        stored = conn.execute(
            text("SELECT count(*), count(DISTINCT ts_ms), min(value) FROM readings")
        ).one()
    assert tuple(stored) == (300, 300, pytest.approx(101325.0))  # 0 kPa(g) = 1 atm (ISO 2533)
    assert ingester.stats.readings_duplicate == 50
    (entry,) = pending_quarantine(engine, source="mqtt")
    assert entry.origin == f"{prefix}/rtu-1/ps" and entry.payload == b"not a number"
    assert "is not a number" in entry.reason
    engine.dispose()


def _openssl(*args: str, cwd: Path) -> None:
    subprocess.run(["openssl", *args], cwd=cwd, check=True, capture_output=True)


@pytest.fixture
def tls_broker(tmp_path):
    """A broker with TLS (our own CA) and a password file: user "ingest", password "sesame-7"."""
    missing = [tool for tool in ("openssl", "mosquitto_passwd") if shutil.which(tool) is None]
    if missing:
        pytest.skip(f"TLS BROKER TEST SKIPPED: {', '.join(missing)} not found")
    from conftest import Broker

    certs = tmp_path / "certs"
    certs.mkdir()
    _openssl("req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2", "-subj",
             "/CN=rimewatch test CA", "-keyout", "ca.key", "-out", "ca.crt", cwd=certs)  # fmt: skip
    _openssl("req", "-newkey", "rsa:2048", "-nodes", "-subj", "/CN=localhost",
             "-keyout", "server.key", "-out", "server.csr", cwd=certs)  # fmt: skip
    (certs / "san.ext").write_text("subjectAltName=DNS:localhost,IP:127.0.0.1\n")
    _openssl("x509", "-req", "-in", "server.csr", "-CA", "ca.crt", "-CAkey", "ca.key",
             "-CAcreateserial", "-days", "2", "-extfile", "san.ext", "-out", "server.crt",
             cwd=certs)  # fmt: skip
    passwords = tmp_path / "passwords"
    passwords.touch()
    subprocess.run(
        ["mosquitto_passwd", "-b", str(passwords), "ingest", "sesame-7"],
        check=True,
        capture_output=True,
    )
    broker = Broker(
        tmp_path / "broker",
        extra_config=f"cafile {certs}/ca.crt\ncertfile {certs}/server.crt\n"
        f"keyfile {certs}/server.key\npassword_file {passwords}\n",
        allow_anonymous=False,
    )
    broker.ca_file = str(certs / "ca.crt")
    broker.start()
    yield broker
    broker.stop()


@pytest.mark.mqtt
def test_tls_and_credentials_from_environment(tls_broker, tmp_path, caplog):
    prefix = fresh_prefix()
    env = {
        "RIMEWATCH_MQTT_USERNAME": "ingest",
        "RIMEWATCH_MQTT_PASSWORD": "wrong",
        "RIMEWATCH_MQTT_CA_FILE": tls_broker.ca_file,
    }
    url = f"sqlite:///{tmp_path / 'plant.db'}"
    common = {"host": "localhost", "port": tls_broker.port, "client_id": f"ingest-{prefix}"}

    refused, engine = ingester_for(url, prefix, MqttSettings.from_env(env, **common))
    refused.start()
    try:
        assert not refused.connected.wait(2.0)
    finally:
        refused.stop()
    assert "refused the connection: Not authorized" in caplog.text  # MQTT 5 reason code 135
    engine.dispose()

    env["RIMEWATCH_MQTT_PASSWORD"] = "sesame-7"
    ingester, engine = ingester_for(url, prefix, MqttSettings.from_env(env, **common))
    ingester.start()
    try:
        assert ingester.subscribed.wait(10)
        client = mqtt.Client(CallbackAPIVersion.VERSION2, protocol=mqtt.MQTTv5)
        client.username_pw_set("ingest", "sesame-7")
        client.tls_set(ca_certs=tls_broker.ca_file)
        client.connect("localhost", tls_broker.port)
        client.loop_start()
        client.publish(f"{prefix}/rtu-1/ps", b"250", qos=1).wait_for_publish(10)
        client.disconnect()
        client.loop_stop()
        assert wait_until(lambda: ingester.stats.readings_stored == 1)
    finally:
        ingester.stop()
    engine.dispose()


@pytest.mark.mqtt
def test_mqtt_311_persistent_session_keeps_messages_while_away(mosquitto, tmp_path):
    """Brokers without MQTT 5: clean_session=False and a fixed client id hold the queue."""
    prefix = fresh_prefix()
    url = f"sqlite:///{tmp_path / 'plant.db'}"
    settings = MqttSettings(
        host=mosquitto.host,
        port=mosquitto.port,
        client_id=f"ingest-{prefix}",
        protocol="3.1.1",
        receive_maximum=20,  # Mosquitto's default max_inflight_messages for 3.1.1 clients
        batch_max_messages=10,
    )
    ingester, engine = ingester_for(url, prefix, settings)
    ingester.start()
    assert ingester.subscribed.wait(10)
    assert ingester.stop()
    publish(mosquitto, numbered(prefix, range(200)))  # while it is away
    ingester, _ = ingester_for(url, prefix, settings)
    ingester.start()
    try:
        assert wait_until(lambda: ingester.stats.readings_stored == 200)
    finally:
        assert ingester.stop()
    assert stored_numbers(tmp_path / "plant.db") == list(range(200))
    engine.dispose()


@pytest.mark.mqtt
@pytest.mark.slow
def test_locked_database_is_retried_until_it_accepts(mosquitto, tmp_path, caplog):
    """Another writer holds SQLite's write lock past the 5 s busy timeout: the batch fails, is
    retried with backoff (nothing acknowledged meanwhile) and stored once the lock is gone."""
    prefix = fresh_prefix()
    settings = MqttSettings(host=mosquitto.host, port=mosquitto.port, client_id=f"ingest-{prefix}")
    ingester, engine = ingester_for(f"sqlite:///{tmp_path / 'plant.db'}", prefix, settings)
    ingester.start()
    blocker = sqlite3.connect(tmp_path / "plant.db", isolation_level=None)
    try:
        assert ingester.subscribed.wait(10)
        blocker.execute("BEGIN IMMEDIATE")  # take the write lock
        publish(mosquitto, numbered(prefix, range(100)))
        assert wait_until(lambda: ingester.stats.store_failures >= 1, timeout_s=15)
        assert ingester.stats.readings_stored == 0
        blocker.execute("ROLLBACK")
        assert wait_until(lambda: ingester.stats.readings_stored == 100, timeout_s=15)
    finally:
        blocker.close()
        assert ingester.stop()
    assert stored_numbers(tmp_path / "plant.db") == list(range(100))
    assert "database is locked" in caplog.text and "nothing acknowledged" in caplog.text
    engine.dispose()
