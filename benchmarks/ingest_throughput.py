"""MQTT ingest throughput: readings stored per second through the full path, beside baselines.

One run, against a Mosquitto broker this script starts on a free loopback port:

1. bare subscriber: a paho-mqtt client that only counts messages, draining a QoS 1 backlog from its
   persistent session (the rate the broker and paho can deliver at all), once acknowledging each
   message as paho does by default and once acknowledging in bursts of 500 as the ingester does
   (the faster of the two is the baseline);
2. full path, single-reading messages: ``{"value": .., "ts": ..}`` per message, drained from the
   backlog by the ingester (decode, SI conversion, validation, INSERT .. ON CONFLICT DO NOTHING in
   batches, commit, then acknowledge each message);
3. full path, batched JSON messages: 200 readings per message;
4. raw ``sqlite3.executemany`` of the same rows into the same table layout (no MQTT, no decoding),
   committing every 500 rows like the ingester.

Each backlog is published by a paho publisher in a separate process while the subscriber is offline,
then drained (as in shared/library-notes.md section 1). Counts are checked: nothing may be lost.
Targets (issue 4): single-reading messages stored at >= 60 % of the bare subscriber's rate,
batched >= 100 000 readings/s, <= 32 bytes per reading on SQLite.

Usage: ``python benchmarks/ingest_throughput.py [--messages 40000] [--batches 1000]``
"""

from __future__ import annotations

import argparse
import json
import multiprocessing
import os
import resource
import shutil
import socket
import sqlite3
import subprocess
import tempfile
import threading
import time
from pathlib import Path

import paho.mqtt.client as mqtt
from paho.mqtt.enums import CallbackAPIVersion
from paho.mqtt.packettypes import PacketTypes
from paho.mqtt.properties import Properties

UNITS = [f"rtu-{n}" for n in range(1, 6)]
ROLES = ["suction_temp", "outdoor_air_temp", "return_air_temp", "supply_air_temp"]
POINTS = [(unit, role) for unit in UNITS for role in ROLES]  # 20 points
BATCH_TOPIC = "bench/batch"
READINGS_PER_BATCH = 200
RECEIVE_MAXIMUM = 1000
ACK_BURST = RECEIVE_MAXIMUM // 2  # the ingester's batch size


def cpu_seconds() -> float:
    """CPU time of this process (all threads) [s]: the subscriber's own cost, whatever the load."""
    usage = resource.getrusage(resource.RUSAGE_SELF)
    return usage.ru_utime + usage.ru_stime


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def start_broker(directory: Path) -> tuple[subprocess.Popen, int]:
    binary = shutil.which("mosquitto") or "/usr/sbin/mosquitto"
    port = free_port()
    config = directory / "mosquitto.conf"
    config.write_text(
        f"listener {port} 127.0.0.1\nallow_anonymous true\npersistence false\n"
        "max_queued_messages 1000000\n" + ("user root\n" if os.geteuid() == 0 else "")
    )
    process = subprocess.Popen([binary, "-c", str(config)], stderr=subprocess.DEVNULL)
    for _ in range(200):
        try:
            socket.create_connection(("127.0.0.1", port), timeout=0.1).close()
            return process, port
        except OSError:
            time.sleep(0.02)
    process.kill()
    raise SystemExit(f"mosquitto did not start on port {port}")


def single_messages(prefix: str, count: int, base_ms: int) -> list[tuple[str, bytes]]:
    """Message i: point i % 20 at base_ms + i [ms], in degC."""
    return [
        (
            f"{prefix}/{POINTS[i % len(POINTS)][0]}/{POINTS[i % len(POINTS)][1]}",
            b'{"value": %.2f, "ts": %d}' % (10.0 + (i % 1000) / 100.0, base_ms + i),
        )
        for i in range(count)
    ]


def batch_messages(topic: str, count: int, base_ms: int) -> list[tuple[str, bytes]]:
    messages = []
    for m in range(count):
        items = []
        for k in range(READINGS_PER_BATCH):
            i = m * READINGS_PER_BATCH + k
            unit, role = POINTS[i % len(POINTS)]
            items.append(
                {"point": f"{unit}/{role}", "value": 10.0 + (i % 1000) / 100, "ts": base_ms + i}
            )
        messages.append((topic, json.dumps(items).encode()))
    return messages


def publish_backlog(port: int, messages: list[tuple[str, bytes]]) -> None:
    """Runs in a child process: publish QoS 1 and wait for every PUBACK."""
    client = mqtt.Client(CallbackAPIVersion.VERSION2, protocol=mqtt.MQTTv5)
    client.max_queued_messages_set(0)
    client.max_inflight_messages_set(100)
    client.connect("127.0.0.1", port)
    client.loop_start()
    pending = []
    for topic, payload in messages:
        pending.append(client.publish(topic, payload, qos=1))
        if len(pending) >= 5000:  # paho's message-id space is 65535 (library-notes section 1)
            for info in pending:
                info.wait_for_publish(60)
            pending.clear()
    for info in pending:
        info.wait_for_publish(60)
    client.disconnect()
    client.loop_stop()


def publish_in_child(port: int, messages) -> float:
    started = time.perf_counter()
    child = multiprocessing.get_context("spawn").Process(
        target=publish_backlog, args=(port, messages)
    )
    child.start()
    child.join()
    if child.exitcode != 0:
        raise SystemExit("the publisher process failed")
    return time.perf_counter() - started


def session_properties() -> Properties:
    properties = Properties(PacketTypes.CONNECT)
    properties.SessionExpiryInterval = 3600
    properties.ReceiveMaximum = RECEIVE_MAXIMUM
    return properties


def bare_drain(
    port: int, topic_filter: str, messages, burst_ack: bool = False
) -> tuple[float, float, int]:
    """(messages/s, CPU s per message, messages received) of a counting-only paho subscriber
    draining a backlog of ``messages``. It acknowledges each message as paho does by default, or
    with ``burst_ack`` in bursts of ACK_BURST as the ingester does after each commit."""
    client_id = f"bench-bare-{os.getpid()}-{topic_filter}"
    subscribed = threading.Event()
    client = mqtt.Client(CallbackAPIVersion.VERSION2, client_id=client_id, protocol=mqtt.MQTTv5)
    client.on_subscribe = lambda *args: subscribed.set()
    client.connect("127.0.0.1", port, clean_start=False, properties=session_properties())
    client.subscribe(topic_filter, qos=1)
    client.loop_start()
    subscribed.wait(10)
    client.disconnect()
    client.loop_stop()

    publish_in_child(port, messages)

    expected = len(messages)
    count = [0]
    done = threading.Event()

    unacked: list[tuple[int, int]] = []

    def on_message(client, userdata, message):
        count[0] += 1
        if burst_ack:
            unacked.append((message.mid, message.qos))
            if len(unacked) >= ACK_BURST or count[0] == expected:
                for mid, qos in unacked:
                    client.ack(mid, qos)
                unacked.clear()
        if count[0] == expected:
            done.set()

    client = mqtt.Client(
        CallbackAPIVersion.VERSION2, client_id=client_id, protocol=mqtt.MQTTv5, manual_ack=burst_ack
    )
    client.on_message = on_message
    started, cpu = time.perf_counter(), cpu_seconds()
    client.connect("127.0.0.1", port, clean_start=False, properties=session_properties())
    client.loop_start()
    done.wait(300)
    elapsed, cpu = time.perf_counter() - started, cpu_seconds() - cpu
    time.sleep(0.2)  # anything beyond the expected count would be a duplicate
    client.disconnect()
    client.loop_stop()
    return expected / elapsed, cpu / expected, count[0]


def site_document(prefix: str) -> dict:
    return {
        "site": {"name": "Lindenhof Logistics bench", "timezone": "UTC"},
        "units": [
            {
                "id": unit,
                "name": f"Dock {unit}",
                "kind": "rooftop_unit",
                "refrigerant": "R410A",
                "expansion_device": "txv",
                "nominal_capacity_kW": 30,
                "points": [
                    {"role": role, "unit": "degC", "mqtt_topic": f"{prefix}/{unit}/{role}"}
                    for role in ROLES
                ],
            }
            for unit in UNITS
        ],
    }


def full_path_drain(port: int, engine, decoder, client_id: str, messages, readings: int):
    """(readings/s, CPU s per message, stats) of the ingester draining a backlog of ``messages``."""
    from rimewatch.ingest.mqtt import Ingester, MqttSettings, StoreSink

    def make():
        settings = MqttSettings(
            host="127.0.0.1",
            port=port,
            client_id=client_id,
            receive_maximum=RECEIVE_MAXIMUM,
            batch_max_messages=RECEIVE_MAXIMUM // 2,
        )
        return Ingester(settings, decoder, StoreSink(engine), [BATCH_TOPIC])

    ingester = make()  # first run creates the persistent session, then goes away
    ingester.start()
    ingester.subscribed.wait(10)
    ingester.stop()

    publish_in_child(port, messages)

    ingester = make()
    started, cpu = time.perf_counter(), cpu_seconds()
    ingester.start()
    end = started + 300
    while ingester.stats.readings_stored < readings and time.perf_counter() < end:
        time.sleep(0.005)
    elapsed, cpu = time.perf_counter() - started, cpu_seconds() - cpu
    time.sleep(0.2)
    ingester.stop()
    return readings / elapsed, cpu / len(messages), ingester.stats


def raw_sqlite_rate(path: Path, rows: list[tuple[int, int, float]], batch: int) -> float:
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA journal_mode=WAL")
    conn.execute("PRAGMA synchronous=NORMAL")
    conn.execute(
        "CREATE TABLE readings (point_id INTEGER NOT NULL, ts_ms INTEGER NOT NULL, value REAL, "
        "PRIMARY KEY (point_id, ts_ms)) WITHOUT ROWID"
    )
    sql = "INSERT INTO readings VALUES (?, ?, ?) ON CONFLICT DO NOTHING"
    started = time.perf_counter()
    for first in range(0, len(rows), batch):
        conn.execute("BEGIN")
        conn.executemany(sql, rows[first : first + batch])
        conn.execute("COMMIT")
    elapsed = time.perf_counter() - started
    conn.close()
    return len(rows) / elapsed


def readings_bytes(db: Path) -> tuple[int, float, float]:
    """(rows, bytes per reading of the readings table's pages, bytes per reading of the file)."""
    conn = sqlite3.connect(db)
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    rows = conn.execute("SELECT count(*) FROM readings").fetchone()[0]
    try:
        table_bytes = conn.execute(
            "SELECT sum(pgsize) FROM dbstat WHERE name = 'readings'"
        ).fetchone()[0]
    except sqlite3.OperationalError:  # SQLite built without the dbstat table
        table_bytes = None
    conn.close()
    file_bytes = db.stat().st_size
    per_table = table_bytes / rows if table_bytes else float("nan")
    return rows, per_table, file_bytes / rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--messages", type=int, default=30_000, help="single-reading messages")
    parser.add_argument("--rounds", type=int, default=2, help="interleaved repetitions")
    parser.add_argument(
        "--batches", type=int, default=1000, help=f"{READINGS_PER_BATCH}-reading messages"
    )
    args = parser.parse_args()

    from rimewatch.ingest.payload import decoder_for_points
    from rimewatch.site import parse_site
    from rimewatch.site_sync import apply_site
    from rimewatch.store import active_points, connect

    workdir = Path(tempfile.mkdtemp(prefix="rimewatch-bench-"))
    broker, port = start_broker(workdir)
    try:
        base_ms = (int(time.time()) - 3600) * 1000
        prefix = "bench/site"
        db = workdir / "ingest.db"
        engine = connect(f"sqlite:///{db}")
        apply_site(engine, parse_site(site_document(prefix)))
        points = active_points(engine)
        decoder = decoder_for_points(points)
        point_ids = {f"{p.unit_key}/{p.role}": p.id for p in points}

        batch_readings = args.batches * READINGS_PER_BATCH
        per_round = args.messages + batch_readings
        best = {
            "bare_single": 0.0,
            "bare_burst": 0.0,
            "bare_batch": 0.0,
            "single": 0.0,
            "batch": 0.0,
        }
        cpu = {key: float("inf") for key in best}  # least CPU s per message over the rounds
        received = duplicates = rejected = 0
        for n in range(args.rounds):  # interleaved, best of each: the machine is shared
            start_ms = base_ms + n * per_round
            rate, cpu_s, count = bare_drain(
                port, f"bench/bare{n}/#", single_messages(f"bench/bare{n}", args.messages, start_ms)
            )
            best["bare_single"] = max(best["bare_single"], rate)
            cpu["bare_single"] = min(cpu["bare_single"], cpu_s)
            received += count
            rate, cpu_s, count = bare_drain(
                port,
                f"bench/burst{n}/#",
                single_messages(f"bench/burst{n}", args.messages, start_ms),
                burst_ack=True,
            )
            best["bare_burst"] = max(best["bare_burst"], rate)
            cpu["bare_burst"] = min(cpu["bare_burst"], cpu_s)
            received += count
            rate, cpu_s, stats = full_path_drain(
                port,
                engine,
                decoder,
                f"bench-ingest-single-{n}",
                single_messages(prefix, args.messages, start_ms),
                args.messages,
            )
            best["single"] = max(best["single"], rate)
            cpu["single"] = min(cpu["single"], cpu_s)
            duplicates += stats.readings_duplicate
            rejected += stats.rejected
            rate, cpu_s, count = bare_drain(
                port, f"bench/barebatch{n}", batch_messages(f"bench/barebatch{n}", args.batches, 0)
            )
            best["bare_batch"] = max(best["bare_batch"], rate)
            cpu["bare_batch"] = min(cpu["bare_batch"], cpu_s)
            received += count
            rate, cpu_s, stats = full_path_drain(
                port,
                engine,
                decoder,
                f"bench-ingest-batch-{n}",
                batch_messages(BATCH_TOPIC, args.batches, start_ms + args.messages),
                batch_readings,
            )
            best["batch"] = max(best["batch"], rate)
            cpu["batch"] = min(cpu["batch"], cpu_s)
            duplicates += stats.readings_duplicate
            rejected += stats.rejected
        engine.dispose()

        rows = [
            (point_ids["/".join(POINTS[i % len(POINTS)])], base_ms + i, 283.15 + (i % 1000) / 100)
            for i in range(per_round)
        ]
        raw_rate = raw_sqlite_rate(workdir / "raw.db", rows, RECEIVE_MAXIMUM // 2)
        stored, table_bytes, file_bytes = readings_bytes(db)
        _, raw_table_bytes, _ = readings_bytes(workdir / "raw.db")
    finally:
        broker.terminate()
        broker.wait()

    expected = args.rounds * per_round
    lost = expected - stored
    bare_expected = args.rounds * (2 * args.messages + args.batches)
    bare_best = max(best["bare_single"], best["bare_burst"])
    ratio = best["single"] / bare_best
    cpu_ratio = min(cpu["bare_single"], cpu["bare_burst"]) / cpu["single"]
    table = [
        ("bare paho subscriber, single messages", best["bare_single"], None, cpu["bare_single"]),
        ("  same, acking in bursts of 500", best["bare_burst"], None, cpu["bare_burst"]),
        ("bare paho subscriber, 200-reading batches", best["bare_batch"], None, cpu["bare_batch"]),
        ("rimewatch ingester, single messages", best["single"], best["single"], cpu["single"]),
        (
            "rimewatch ingester, 200-reading batches",
            best["batch"] / READINGS_PER_BATCH,
            best["batch"],
            cpu["batch"],
        ),
        ("raw sqlite3 executemany, 500-row commits", None, raw_rate, None),
    ]
    heading = f"path (best of {args.rounds} rounds)"
    print(f"{heading:<44}{'messages/s':>12}{'readings/s':>12}{'CPU us/msg':>12}")
    for name, messages_per_s, readings_per_s, cpu_per_message in table:
        shown = [
            f"{v:>12,.0f}" if v is not None else f"{'-':>12}"
            for v in (messages_per_s, readings_per_s)
        ]
        shown.append(f"{cpu_per_message * 1e6:>12,.1f}" if cpu_per_message else f"{'-':>12}")
        print(f"{name:<44}{''.join(shown)}")
    print(
        f"CPU of this process per single message: cheaper bare / ingester = {cpu_ratio:.0%} "
        "(the rate ratio to expect when both are CPU-bound on an idle machine)"
    )
    print(
        f"single-reading ingest / faster bare receive = {ratio:.0%} (target >= 60 %); "
        f"batched {best['batch']:,.0f} readings/s (target >= 100,000)"
    )
    print(
        f"stored {stored}/{expected} readings (lost {lost}), duplicates {duplicates}, "
        f"quarantined {rejected}; bare subscriber received {received}/{bare_expected} messages"
    )
    print(
        f"SQLite bytes per reading: readings table {table_bytes:.1f} (raw baseline table "
        f"{raw_table_bytes:.1f}), whole file {file_bytes:.1f} (target <= 32)"
    )
    shutil.rmtree(workdir, ignore_errors=True)
    print(
        f"RESULT single_readings_per_s={best['single']:.0f} "
        f"bare_messages_per_s={bare_best:.0f} single_vs_bare={ratio:.2f} "
        f"single_vs_bare_cpu={cpu_ratio:.2f} "
        f"batched_readings_per_s={best['batch']:.0f} raw_sqlite_rows_per_s={raw_rate:.0f} "
        f"bytes_per_reading={table_bytes:.1f} lost={lost}"
    )


if __name__ == "__main__":
    main()
