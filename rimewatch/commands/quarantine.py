"""``rimewatch quarantine``: look at rejected input and re-process it after a configuration fix."""

from __future__ import annotations

from datetime import UTC, datetime

import click

from rimewatch.commands._store_common import (
    apply_and_report,
    db_option,
    load_site_file,
    open_database,
)


@click.group("quarantine")
def quarantine():
    """Input that could not become readings (bad payloads, bad CSV cells and lines).

    Example:

    \b
        rimewatch quarantine list --source csv
        rimewatch quarantine reprocess site.yaml
    """


@quarantine.command("list")
@click.option(
    "--source", type=click.Choice(["mqtt", "csv"]), default=None, help="Only this source."
)
@click.option("--all", "include_reprocessed", is_flag=True, help="Include reprocessed entries.")
@click.option("--limit", default=50, show_default=True, help="Show at most this many (0: all).")
@db_option
def list_entries(source, include_reprocessed, limit, db_url):
    """List quarantined input, oldest first: when, where from, why, and the raw payload.

    Example:

    \b
        rimewatch quarantine list --source mqtt --limit 20
    """
    from rich.console import Console
    from rich.table import Table

    from rimewatch.store import pending_quarantine

    engine = open_database(db_url)
    entries = pending_quarantine(engine, source, include_reprocessed)
    shown = entries if limit <= 0 else entries[:limit]
    table = Table("id", "received (UTC)", "source", "origin", "line", "reason", "payload")
    for entry in shown:
        received = datetime.fromtimestamp(entry.received_ms / 1000, UTC).strftime(
            "%Y-%m-%d %H:%M:%S"
        )
        payload = bytes(entry.payload).decode("utf-8", errors="replace")
        if len(payload) > 80:
            payload = payload[:77] + "..."
        reason = entry.reason + (" [reprocessed]" if entry.reprocessed else "")
        table.add_row(
            str(entry.id),
            received,
            entry.source,
            entry.origin,
            "" if entry.line is None else str(entry.line),
            reason,
            payload,
        )
    Console(width=200).print(table)
    click.echo(f"{len(shown)} of {len(entries)} entries shown")


@quarantine.command("reprocess")
@click.argument("site_file", type=click.Path(dir_okay=False))
@db_option
def reprocess(site_file, db_url):
    """Decode the site's quarantined input again with SITE_FILE as it is now.

    Applies SITE_FILE first. Entries that now decode are stored as readings and marked
    reprocessed; the rest stay in quarantine. Lines that were cut off or had too many fields
    cannot be re-read from quarantine: fix the file and import it again.

    Example:

    \b
        rimewatch quarantine reprocess site.yaml
    """
    from zoneinfo import ZoneInfo

    from rimewatch.ingest.csv_import import reprocess_csv
    from rimewatch.ingest.payload import decoder_for_points
    from rimewatch.site_sync import csv_targets
    from rimewatch.store import active_points, mark_reprocessed, pending_quarantine, write_readings

    config = load_site_file(site_file)
    engine = open_database(db_url)
    apply_and_report(engine, config)
    fmt, columns, site_id = csv_targets(engine, config)
    pending = [e for e in pending_quarantine(engine) if e.site_id in (site_id, None)]

    csv_entries = [e for e in pending if e.source == "csv" and e.site_id == site_id]
    csv_stored, csv_done = reprocess_csv(
        engine, csv_entries, fmt, columns, config.atmospheric_pressure_Pa
    )

    mqtt_entries = [e for e in pending if e.source == "mqtt"]
    mqtt_stored, mqtt_done = 0, []
    if mqtt_entries:
        decoder = decoder_for_points(
            active_points(engine, site=config.site.name),
            naive_tz=ZoneInfo(config.site.timezone),
        )
        decoder.limits.max_age_s = float("inf")  # the entry's age is not a reason to refuse it now
        with engine.begin() as conn:
            for entry in mqtt_entries:
                readings, rejects = [], []
                decoder.decode(
                    entry.origin, bytes(entry.payload), entry.received_ms, readings, rejects
                )
                if rejects or not readings:
                    continue
                mqtt_stored += write_readings(conn, readings)
                mqtt_done.append(entry.id)
            mark_reprocessed(conn, mqtt_done)

    remaining = len(pending) - len(csv_done) - len(mqtt_done)
    click.echo(
        f"reprocessed {len(csv_done)} csv and {len(mqtt_done)} mqtt entries "
        f"({csv_stored + mqtt_stored} readings stored); {remaining} remain in quarantine"
    )
