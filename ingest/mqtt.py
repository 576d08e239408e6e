"""The MQTT ingester: a paho-mqtt 2 subscriber that acknowledges a reading only once it is stored.

Threads: paho's network thread runs ``on_message``, which only puts the message on a queue. A
decoder thread takes messages off the queue, decodes them (:mod:`rimewatch.ingest.payload`) and
gathers them into batches; a writer thread stores each batch's readings and rejections in one
transaction through a :class:`Sink`, commits, and only then acknowledges each of its messages
(``manual_ack``). The two overlap: SQLite releases the GIL while it writes. A crash at any point
leaves unacknowledged messages with the broker, which redelivers them; the store ignores readings
it already has, so redelivery is harmless.

The session is persistent (MQTT 5 ``clean_start=False`` with a session expiry interval and a fixed
client id), so messages published while the ingester is down wait at the broker, up to its
``max_queued_messages`` limit. The broker sends at most ``receive_maximum`` unacknowledged messages,
so a batch is flushed when it holds ``batch_max_messages`` (kept below that window) or when its
oldest message has waited ``flush_interval_s``.

Environment variables (read by :func:`MqttSettings.from_env`):

``RIMEWATCH_MQTT_USERNAME`` / ``RIMEWATCH_MQTT_PASSWORD``
    credentials for the broker;
``RIMEWATCH_MQTT_TLS``
    ``1``/``true`` to use TLS with the system's certificate authorities;
``RIMEWATCH_MQTT_CA_FILE``
    a CA certificate (PEM) to verify the broker with; implies TLS.
"""

from __future__ import annotations

import logging
import os
import queue
import threading
import time
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Protocol

import paho.mqtt.client as mqtt
from paho.mqtt.enums import CallbackAPIVersion
from paho.mqtt.packettypes import PacketTypes
from paho.mqtt.properties import Properties

from rimewatch.ingest.payload import PayloadDecoder, Rejection, topic_matches
from rimewatch.store import QuarantineEntry, write_quarantine, write_readings

log = logging.getLogger(__name__)

ENV_USERNAME = "RIMEWATCH_MQTT_USERNAME"
ENV_PASSWORD = "RIMEWATCH_MQTT_PASSWORD"
ENV_TLS = "RIMEWATCH_MQTT_TLS"
ENV_CA_FILE = "RIMEWATCH_MQTT_CA_FILE"
_TRUE = {"1", "true", "yes", "on"}


class Sink(Protocol):
    """Where the writer thread puts a batch: both lists in one transaction, committed on return."""

    def store(
        self, readings: Sequence[tuple[int, int, float]], rejects: Sequence[Rejection]
    ) -> int:
        """Store readings (idempotently) and rejections; return the readings newly stored."""


class StoreSink:
    """A :class:`Sink` over the rimewatch database (``rimewatch.store``)."""

    def __init__(self, engine, site_id: int | None = None):
        self.engine = engine
        self.site_id = site_id

    def store(self, readings, rejects) -> int:
        with self.engine.begin() as conn:
            stored = write_readings(conn, readings)
            if rejects:
                write_quarantine(
                    conn,
                    [
                        QuarantineEntry(
                            "mqtt", r.topic, None, r.payload, r.reason, r.received_ms, self.site_id
                        )
                        for r in rejects
                    ],
                )
        return stored


@dataclass
class MqttSettings:
    """How to reach the broker and how to hold the session; times in seconds."""

    host: str = "localhost"
    port: int = 1883
    client_id: str = "rimewatch-ingest"
    username: str | None = None
    password: str | None = field(default=None, repr=False)
    tls: bool = False
    ca_file: str | None = None
    keepalive_s: int = 30
    session_expiry_s: int = 7 * 24 * 3600
    receive_maximum: int = 1000
    protocol: str = "5"  # "5", or "3.1.1" for brokers without MQTT 5 (no session expiry there)
    batch_max_messages: int = 500
    flush_interval_s: float = 0.2
    reconnect_min_delay_s: int = 1
    reconnect_max_delay_s: int = 60

    @classmethod
    def from_env(cls, environ=os.environ, **overrides) -> MqttSettings:
        """Settings with credentials and TLS from the ``RIMEWATCH_MQTT_*`` variables."""
        ca_file = environ.get(ENV_CA_FILE) or None
        tls = ca_file is not None or environ.get(ENV_TLS, "").strip().lower() in _TRUE
        settings = cls(
            username=environ.get(ENV_USERNAME) or None,
            password=environ.get(ENV_PASSWORD) or None,
            tls=tls,
            ca_file=ca_file,
        )
        for name, value in overrides.items():
            setattr(settings, name, value)
        return settings

    def __post_init__(self):
        if self.protocol not in ("5", "3.1.1"):
            raise ValueError(f"MQTT protocol {self.protocol!r}: use '5' or '3.1.1'")
        if not 1 <= self.batch_max_messages <= self.receive_maximum:
            raise ValueError(
                f"batch_max_messages ({self.batch_max_messages}) must be between 1 and "
                f"receive_maximum ({self.receive_maximum}), or the writer waits for messages "
                "the broker will not send"
            )


@dataclass
class IngestStats:
    """Counters since start (updated by the writer thread only)."""

    messages: int = 0
    readings_stored: int = 0
    readings_duplicate: int = 0
    rejected: int = 0
    commits: int = 0
    store_failures: int = 0
    connects: int = 0


_STOP = object()
_POLL_S = 0.002  # decoder's nap while a batch is open and the queue is empty


def subscription_filters(point_filters: Sequence[str], extra_filters: Sequence[str]) -> list[str]:
    """Distinct filters to subscribe to, leaving out point filters an extra filter already covers
    (overlapping subscriptions can make the broker deliver a message twice)."""
    extra = list(dict.fromkeys(extra_filters))
    kept = [
        f
        for f in dict.fromkeys(point_filters)
        if not any(_covers(wide, f) for wide in extra) and f not in extra
    ]
    return kept + extra


def _covers(wide: str, narrow: str) -> bool:
    """Every topic matching filter ``narrow`` also matches filter ``wide``."""
    if "#" in narrow and not wide.endswith("#"):
        return False
    return topic_matches(wide, narrow)


#: an empty QoS 1 publish here at shutdown proves the broker has read our acknowledgements
FLUSH_TOPIC_PREFIX = "rimewatch/shutdown"


class Ingester:
    """Subscribe to the decoder's topics (and ``extra_filters``) and store what arrives.

    Call :meth:`start`, then :meth:`stop` (from any thread, e.g. after SIGTERM): it stores and
    acknowledges every message already received, then disconnects.
    """

    def __init__(
        self,
        settings: MqttSettings,
        decoder: PayloadDecoder,
        sink: Sink,
        extra_filters: Sequence[str] = (),
    ):
        self.settings = settings
        self.decoder = decoder
        self.sink = sink
        self.filters = subscription_filters(decoder.topics.filters, extra_filters)
        self.stats = IngestStats()
        self.connected = threading.Event()
        self.subscribed = threading.Event()
        self._queue: queue.SimpleQueue = queue.SimpleQueue()
        self._stopping = threading.Event()
        self._disconnected = threading.Event()
        self._session = 0  # counts connections: an ack is only valid on the connection it came on
        self._batches: queue.Queue = queue.Queue(maxsize=2)  # decoded batches awaiting commit
        self._decoder = threading.Thread(target=self._decode_loop, name="rimewatch-decoder")
        self._writer = threading.Thread(target=self._write_loop, name="rimewatch-writer")
        self.client = self._make_client()

    def _make_client(self) -> mqtt.Client:
        s = self.settings
        if s.protocol == "5":
            client = mqtt.Client(
                CallbackAPIVersion.VERSION2,
                client_id=s.client_id,
                protocol=mqtt.MQTTv5,
                manual_ack=True,
            )
        else:  # MQTT 3.1.1: the persistent session is clean_session=False, kept until it expires
            client = mqtt.Client(
                CallbackAPIVersion.VERSION2,
                client_id=s.client_id,
                protocol=mqtt.MQTTv311,
                clean_session=False,
                manual_ack=True,
            )
        if s.username is not None:
            client.username_pw_set(s.username, s.password)
        if s.tls:
            client.tls_set(ca_certs=s.ca_file)  # verifies the certificate and the host name
        client.reconnect_delay_set(s.reconnect_min_delay_s, s.reconnect_max_delay_s)
        client.on_connect = self._on_connect
        client.on_disconnect = self._on_disconnect
        client.on_message = self._on_message
        client.on_subscribe = self._on_subscribe
        client.on_connect_fail = self._on_connect_fail
        return client

    def start(self) -> None:
        """Connect in the background (retrying with backoff) and start the writer thread."""
        s = self.settings
        self._writer.start()
        self._decoder.start()
        if s.protocol == "5":
            properties = Properties(PacketTypes.CONNECT)
            properties.SessionExpiryInterval = s.session_expiry_s
            properties.ReceiveMaximum = s.receive_maximum
            self.client.connect_async(
                s.host, s.port, keepalive=s.keepalive_s, clean_start=False, properties=properties
            )
        else:
            self.client.connect_async(s.host, s.port, keepalive=s.keepalive_s)
        self.client.loop_start()

    def stop(self, timeout_s: float = 30.0) -> bool:
        """Store and acknowledge what has been received, then disconnect.

        Messages arriving after the stop request stay unacknowledged; the broker keeps them in the
        session for the next run. Returns False when the writer did not finish in time (its
        messages are then redelivered later, not lost).
        """
        self._stopping.set()
        self._queue.put(_STOP)
        end = time.monotonic() + timeout_s
        self._decoder.join(timeout_s)
        self._writer.join(max(end - time.monotonic(), 0.0))
        finished = not self._writer.is_alive()
        self._flush_acknowledgements(max(end - time.monotonic(), 1.0))
        self._disconnected.clear()
        self.client.disconnect()
        # paho reports the disconnect once its DISCONNECT packet is written, after every
        # acknowledgement queued before it: stopping the network thread earlier would drop them
        self._disconnected.wait(max(end - time.monotonic(), 1.0))
        self.client.loop_stop()
        return finished

    def _flush_acknowledgements(self, timeout_s: float) -> None:
        """Return once the broker has read every acknowledgement sent so far.

        Closing a TCP socket that still has unread incoming data (messages the broker keeps
        sending) resets the connection, and the broker may drop acknowledgements it has not read
        yet: it would send those messages again. The broker reads a connection in order, so the
        acknowledgement of one QoS 1 publish of our own proves it has read all before it.
        """
        if not self.connected.is_set():
            return
        topic = f"{FLUSH_TOPIC_PREFIX}/{self.settings.client_id}"
        try:
            self.client.publish(topic, b"", qos=1).wait_for_publish(timeout_s)
        except (RuntimeError, ValueError) as exc:  # gone meanwhile: the broker redelivers
            log.warning("could not confirm the last acknowledgements: %s", exc)

    # paho callbacks: network thread, never block here

    def _on_connect(self, client, userdata, flags, reason_code, properties) -> None:
        if reason_code.is_failure:
            log.error(
                "broker %s:%d refused the connection: %s",
                self.settings.host,
                self.settings.port,
                reason_code,
            )
            return
        self._session += 1
        self.stats.connects += 1
        log.info(
            "connected to %s:%d as %r (session present: %s); subscribing to %d filter(s)",
            self.settings.host,
            self.settings.port,
            self.settings.client_id,
            flags.session_present,
            len(self.filters),
        )
        if self.filters:
            client.subscribe([(f, 1) for f in self.filters])
        self.connected.set()

    def _on_connect_fail(self, client, userdata) -> None:
        log.warning(
            "cannot reach the broker at %s:%d; retrying with backoff",
            self.settings.host,
            self.settings.port,
        )

    def _on_subscribe(self, client, userdata, mid, reason_codes, properties) -> None:
        refused = [
            f for f, code in zip(self.filters, reason_codes, strict=False) if code.is_failure
        ]
        if refused:
            log.error("the broker refused the subscription to %s", ", ".join(refused))
        log.info("subscribed to %d filter(s)", len(self.filters) - len(refused))
        self.subscribed.set()

    def _on_disconnect(self, client, userdata, flags, reason_code, properties) -> None:
        self.connected.clear()
        self._disconnected.set()
        if not self._stopping.is_set():
            log.warning("disconnected from the broker (%s); reconnecting", reason_code)

    def _on_message(self, client, userdata, message) -> None:
        self._queue.put(
            (message.mid, message.qos, message.topic, message.payload, self._session, time.time())
        )

    # decoder and writer threads

    def _decode_loop(self) -> None:
        s = self.settings
        get, get_nowait = self._queue.get, self._queue.get_nowait
        decode = self.decoder.decode
        readings: list[tuple[int, int, float]] = []
        rejects: list[Rejection] = []
        held: list[tuple[int, int, int]] = []  # (mid, qos, session) to acknowledge after commit
        deadline = 0.0
        stopping = False
        while not stopping:
            if not held:
                item = get()  # idle: block until a message comes
            else:
                # Busy: poll with short sleeps rather than block per message, so messages
                # arriving meanwhile are taken in one go instead of waking this thread each time.
                try:
                    item = get_nowait()
                except queue.Empty:
                    remaining_s = deadline - time.monotonic()
                    if remaining_s > 0:
                        time.sleep(min(_POLL_S, remaining_s))
                        continue
                    item = None
            if item is _STOP:
                stopping = True
            elif item is not None:
                mid, qos, topic, payload, session, received = item
                if not held:
                    deadline = time.monotonic() + s.flush_interval_s
                received_ms = int(received * 1000.0)
                try:
                    decode(topic, payload, received_ms, readings, rejects)
                except Exception as exc:  # a decoder bug must not lose the message
                    log.exception("decoding a message on %r failed", topic)
                    rejects.append(
                        Rejection(topic, payload, f"internal decoding error: {exc!r}", received_ms)
                    )
                held.append((mid, qos, session))
                if len(held) < s.batch_max_messages and time.monotonic() < deadline:
                    continue
            if held:
                self._batches.put((readings, rejects, held))
                readings, rejects, held = [], [], []
        self._batches.put(_STOP)

    def _write_loop(self) -> None:
        storing = True
        while True:
            batch = self._batches.get()
            if batch is _STOP:
                return
            if storing:
                # False: stopping while the store fails; later batches stay unacknowledged too
                storing = self._flush(*batch, give_up=self._stopping)

    def _flush(self, readings, rejects, held, give_up: threading.Event) -> bool:
        delay_s = 0.5
        while True:
            try:
                stored = self.sink.store(readings, rejects)
                break
            except Exception:
                self.stats.store_failures += 1
                log.exception(
                    "storing %d readings failed; retrying in %.1f s (nothing acknowledged)",
                    len(readings),
                    delay_s,
                )
                if give_up.wait(delay_s):
                    return False
                delay_s = min(delay_s * 2, 30.0)
        stats = self.stats
        stats.commits += 1
        stats.messages += len(held)
        stats.readings_stored += stored
        stats.readings_duplicate += len(readings) - stored
        stats.rejected += len(rejects)
        ack = self.client.ack
        current = self._session
        for mid, qos, session in held:
            # After a reconnect the broker redelivers the older copy, which is acked then.
            if qos and session == current:
                ack(mid, qos)
        return True

    def stats_line(self) -> str:
        s = self.stats
        return (
            f"messages={s.messages} stored={s.readings_stored} duplicates={s.readings_duplicate} "
            f"quarantined={s.rejected} commits={s.commits} store_failures={s.store_failures} "
            f"connects={s.connects} connected={self.connected.is_set()} "
            f"queued={self._queue.qsize()}"
        )
