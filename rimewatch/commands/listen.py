"""``rimewatch listen``: run the MQTT ingester for one site until SIGTERM or Ctrl-C."""

from __future__ import annotations

import logging
import signal
import threading
from zoneinfo import ZoneInfo

import click

log = logging.getLogger("rimewatch.listen")


def parse_broker(text: str, tls: bool) -> tuple[str, int]:
    """``host``, ``host:port`` or ``[ipv6]:port`` -> (host, port); default port 1883 (8883 TLS)."""
    if text.startswith("["):
        host, _, port = text[1:].partition("]")
        port = port.removeprefix(":")
    elif text.count(":") == 1:
        host, port = text.split(":")
    else:
        host, port = text, ""
    if not port:
        return host, 8883 if tls else 1883
    if not port.isdigit() or not 0 < int(port) < 65536:
        raise click.BadParameter(f"{text!r}: the port must be a number from 1 to 65535")
    return host, int(port)


@click.command()
@click.argument("site_file", type=click.Path(dir_okay=False))
@click.option(
    "--broker",
    default="localhost",
    show_default=True,
    envvar="RIMEWATCH_MQTT_BROKER",
    help="host[:port] of the MQTT broker (port 1883, or 8883 with TLS). Env RIMEWATCH_MQTT_BROKER.",
)
@click.option(
    "--db", "db_url", default=None, help="Database URL (default: $RIMEWATCH_DB or ./rimewatch.db)."
)
@click.option(
    "--client-id",
    default=None,
    help="Fixed MQTT client id: the broker keeps this session's queue while the ingester is away. "
    "Default: rimewatch-<site name>.",
)
@click.option(
    "--batch-topic",
    "batch_topics",
    multiple=True,
    help="Extra topic filter for JSON batches whose items name their point or topic (repeatable).",
)
@click.option(
    "--session-expiry",
    default=7 * 24 * 3600,
    show_default=True,
    help="[s] the broker keeps the session and its queued messages while the ingester is away.",
)
@click.option(
    "--receive-maximum",
    type=click.IntRange(2, 65535),
    default=None,
    help="Unacknowledged messages the broker may send at once (default 1000; with MQTT 3.1.1 "
    "the broker decides: give its max_inflight_messages, default 20 on Mosquitto).",
)
@click.option(
    "--mqtt-version",
    type=click.Choice(["5", "3.1.1"]),
    default="5",
    show_default=True,
    help="3.1.1 only for brokers without MQTT 5.",
)
@click.option(
    "--flush-interval",
    default=0.2,
    show_default=True,
    help="[s] longest a received message waits before its batch is committed.",
)
@click.option(
    "--max-payload-bytes",
    default=256 * 1024,
    show_default=True,
    help="Larger payloads go to quarantine.",
)
@click.option(
    "--stats-interval",
    default=60.0,
    show_default=True,
    help="[s] between statistics lines in the log.",
)
@click.option("-v", "--verbose", is_flag=True, help="Debug logging.")
def listen(
    site_file,
    broker,
    db_url,
    client_id,
    batch_topics,
    session_expiry,
    receive_maximum,
    mqtt_version,
    flush_interval,
    max_payload_bytes,
    stats_interval,
    verbose,
):
    """Store every reading the site's MQTT topics deliver; quarantine what cannot be read.

    Applies SITE_FILE to the database, subscribes (QoS 1, persistent MQTT 5 session) to each
    point's mqtt_topic and acknowledges a message only after its readings are committed. Stops
    cleanly on SIGTERM or Ctrl-C: commits and acknowledges what it holds, then disconnects.
    Credentials and TLS come from RIMEWATCH_MQTT_USERNAME, RIMEWATCH_MQTT_PASSWORD,
    RIMEWATCH_MQTT_TLS and RIMEWATCH_MQTT_CA_FILE (see docs/mqtt.md).

    Example:

    \b
        rimewatch listen site.yaml --broker mqtt.example.net:1883 --db sqlite:///data/plant.db
    """
    logging.basicConfig(
        level=logging.DEBUG if verbose else logging.INFO,
        format="%(asctime)s %(levelname)s %(name)s: %(message)s",
    )
    logging.getLogger("alembic").setLevel(logging.WARNING)
    from sqlalchemy.exc import SQLAlchemyError

    from rimewatch.ingest.mqtt import Ingester, MqttSettings, StoreSink
    from rimewatch.ingest.payload import DecodeLimits, decoder_for_points
    from rimewatch.site import SiteConfigError, load_site
    from rimewatch.site_sync import apply_site
    from rimewatch.store import DatabaseURLError, active_points, connect

    try:
        config = load_site(site_file)
        engine = connect(db_url)
        for change in apply_site(engine, config):
            log.info("site file: %s", change)
        points = active_points(engine, site=config.site.name)
    except (SiteConfigError, DatabaseURLError) as exc:
        raise click.ClickException(str(exc)) from None
    except SQLAlchemyError as exc:
        raise click.ClickException(
            f"database: {exc.__class__.__name__}: {exc.orig or exc}"
        ) from None
    site_name = config.site.name
    if not points:
        raise click.ClickException(f"{site_file}: site {site_name!r} has no points")
    try:
        decoder = decoder_for_points(
            points,
            DecodeLimits(max_payload_bytes=max_payload_bytes),
            ZoneInfo(config.site.timezone),
        )
        if receive_maximum is None:
            receive_maximum = 1000 if mqtt_version == "5" else 20
        settings = MqttSettings.from_env(
            client_id=client_id or f"rimewatch-{site_name}".replace(" ", "-")[:200],
            session_expiry_s=session_expiry,
            receive_maximum=receive_maximum,
            protocol=mqtt_version,
            batch_max_messages=max(1, receive_maximum // 2),
            flush_interval_s=flush_interval,
        )
        settings.host, settings.port = parse_broker(broker, settings.tls)
        ingester = Ingester(settings, decoder, StoreSink(engine, points[0].site_id), batch_topics)
    except ValueError as exc:
        raise click.ClickException(f"{site_file}: {exc}") from None
    if not ingester.filters:
        raise click.ClickException(
            f"{site_file}: no point has an mqtt_topic and no --batch-topic was given"
        )

    stop = threading.Event()

    def request_stop(signum, _frame):
        log.info(
            "%s received: committing what is held, then disconnecting", signal.Signals(signum).name
        )
        stop.set()

    signal.signal(signal.SIGTERM, request_stop)
    signal.signal(signal.SIGINT, request_stop)
    log.info(
        "listening for site %r on %s:%d (%d points, %d topic filters, client id %r)",
        site_name,
        settings.host,
        settings.port,
        len(points),
        len(ingester.filters),
        settings.client_id,
    )
    ingester.start()
    while not stop.wait(stats_interval):
        log.info("stats: %s", ingester.stats_line())
    finished = ingester.stop()
    log.info("stopped: %s", ingester.stats_line())
    if not finished:
        raise click.ClickException(
            "the store did not accept the last batch; its messages stay with the broker"
        )
