"""``rimewatch faults``: list fault events; acknowledge, annotate, maintenance mode."""

from __future__ import annotations

import click

from rimewatch.commands._detect_common import select_units
from rimewatch.commands._store_common import db_option, open_database

#: stable machine-readable fields, in order (impact is an object in JSON, flat columns in CSV)
FIELDS = (
    "id", "site", "unit", "code", "detail", "start", "end", "severity", "severity_score",
    "confidence", "impact", "acknowledged", "suppressed", "evidence",
)  # fmt: skip
IMPACT_FIELDS = ("capacity_loss_pct", "extra_power_pct", "extra_kwh_per_day", "cost_per_day")
CAUTION = (
    "Automated diagnosis: confirm on site with a licensed, certified technician. Refrigerant "
    "circuits are pressurised; some refrigerants are flammable (A2L, A3) or toxic (B2L); follow "
    "local codes for handling and recovery."
)


def _iso(ms):
    import pandas as pd

    return None if ms is None else pd.Timestamp(ms, unit="ms", tz="UTC").isoformat()


def _record(row: dict) -> dict:
    from rimewatch.detect.diagnose import severity_label

    return {
        "id": row["id"],
        "site": row["site"],
        "unit": row["unit"],
        "code": row["code"],
        "detail": row["detail"],
        "start": _iso(row["start_ms"]),
        "end": _iso(row["end_ms"]),
        "severity": severity_label(row["severity"]),
        "severity_score": round(row["severity"], 3),
        "confidence": round(row["confidence"], 3),
        "impact": {k: row["impact"].get(k) for k in IMPACT_FIELDS},
        "acknowledged": row["acknowledged_ms"] is not None,
        "suppressed": row["suppressed"],
        "evidence": row["evidence"],
    }


def _print_table(records: list[dict]) -> None:
    from rich.console import Console
    from rich.table import Table

    table = Table(title="fault events (times UTC)")
    for name in ("id", "unit", "fault", "since", "until", "severity", "conf.", "impact", "ack"):
        table.add_column(name, overflow="fold")
    for r in records:
        impact = r["impact"]
        text = (
            f"-{impact['capacity_loss_pct']}% cap., +{impact['extra_kwh_per_day']} kWh/d"
            if impact.get("capacity_loss_pct") is not None
            else ""
        )
        table.add_row(
            str(r["id"]),
            r["unit"],
            f"{r['code']} {r['detail']}".strip(),
            f"{r['start'][5:10]} {r['start'][11:16]}",
            "open" if r["end"] is None else f"{r['end'][5:10]} {r['end'][11:16]}",
            r["severity"],
            f"{r['confidence']:.0%}",
            text,
            "yes" if r["acknowledged"] else "",
        )
    console = Console()
    console.print(table)
    console.print(CAUTION)


@click.group(invoke_without_command=True)
@click.option("--unit", "unit_key", default=None, help="Only this unit (its id in the site file).")
@click.option("--site", "site_name", default=None, help="Only this site (its name).")
@click.option("--open", "open_only", is_flag=True, help="Only events still open.")
@click.option(
    "--all", "include_suppressed", is_flag=True, help="Include events raised in maintenance."
)
@click.option(
    "--format",
    "output_format",
    type=click.Choice(["table", "json", "csv"]),
    default="table",
    show_default=True,
)
@db_option
@click.pass_context
def faults(ctx, unit_key, site_name, open_only, include_suppressed, output_format, db_url):
    """List fault events, newest first, with severity, confidence and impact.

    Stable fields (json, csv): id, site, unit, code, detail, start, end (null while open),
    severity (mild/moderate/severe), severity_score, confidence, impact (capacity_loss_pct,
    extra_power_pct, extra_kwh_per_day, cost_per_day; null when unknown), acknowledged,
    suppressed, evidence. Subcommands acknowledge, annotate and set maintenance mode.

    Example:

    \b
        rimewatch faults --open
        rimewatch faults --unit rtu-1 --format json
        rimewatch faults ack 12 --by "Dana Okafor"
        rimewatch faults note 12 "filter replaced" --by "Dana Okafor"
        rimewatch faults maintenance rtu-1 --on --note "coil cleaning"
    """
    if ctx.invoked_subcommand is not None:
        ctx.obj = {"db_url": db_url}
        return
    import csv
    import json
    import sys

    from rimewatch.store.events import list_events

    engine = open_database(db_url)
    unit_ids = None
    if unit_key is not None or site_name is not None:
        unit_ids = [u.id for u in select_units(engine, unit_key, site_name)]
    rows = list_events(engine, unit_ids, include_suppressed, open_only)
    records = [_record(row) for row in rows]
    if output_format == "json":
        click.echo(json.dumps(records, indent=2))
    elif output_format == "csv":
        writer = csv.writer(sys.stdout, lineterminator="\n")
        header = [f for f in FIELDS if f != "impact"] + list(IMPACT_FIELDS)
        writer.writerow(header)
        for r in records:
            flat = {**r, **r["impact"]}
            writer.writerow(["" if flat[h] is None else flat[h] for h in header])
    else:
        _print_table(records)


def _db(ctx) -> str | None:
    return (ctx.obj or {}).get("db_url")


@faults.command("ack")
@click.argument("event_id", type=int)
@click.option("--by", "person", required=True, help="Who acknowledges.")
@db_option
@click.pass_context
def acknowledge(ctx, event_id, person, db_url):
    """Acknowledge event EVENT_ID (it stays listed, marked acknowledged).

    Example:

    \b
        rimewatch faults ack 12 --by "Dana Okafor"
    """
    import time

    from rimewatch.store.events import acknowledge_event

    engine = open_database(db_url or _db(ctx))
    if not acknowledge_event(engine, event_id, person, int(time.time() * 1000)):
        raise click.ClickException(f"no event with id {event_id}")
    click.echo(f"event {event_id} acknowledged by {person}")


@faults.command("note")
@click.argument("event_id", type=int)
@click.argument("text")
@click.option("--by", "person", required=True, help="Who writes the note.")
@db_option
@click.pass_context
def note(ctx, event_id, text, person, db_url):
    """Attach a note to event EVENT_ID.

    Example:

    \b
        rimewatch faults note 12 "condenser coil cleaned" --by "Dana Okafor"
    """
    import time

    from rimewatch.store.events import add_note

    if not text.strip():
        raise click.ClickException("the note is empty")
    engine = open_database(db_url or _db(ctx))
    try:
        add_note(engine, event_id, person, text, int(time.time() * 1000))
    except LookupError as exc:
        raise click.ClickException(str(exc)) from None
    click.echo(f"note added to event {event_id}")


@faults.command("maintenance")
@click.argument("unit_key", metavar="UNIT")
@click.option("--on/--off", "on", required=True, help="Start or end maintenance mode.")
@click.option(
    "--site", "site_name", default=None, help="The unit's site, when its id is not unique."
)
@click.option("--note", "text", default="", help="Why (kept with the maintenance window).")
@db_option
@click.pass_context
def maintenance(ctx, unit_key, on, site_name, text, db_url):
    """Put UNIT in maintenance mode (--on) or take it out (--off).

    Events that start while a unit is in maintenance are stored suppressed (hidden unless
    `rimewatch faults --all`); its open events are suppressed when maintenance starts, and
    those still open when it ends are shown again.

    Example:

    \b
        rimewatch faults maintenance rtu-1 --on --note "coil cleaning"
        rimewatch faults maintenance rtu-1 --off
    """
    import time

    from rimewatch.store.events import set_maintenance

    engine = open_database(db_url or _db(ctx))
    (unit,) = select_units(engine, unit_key, site_name)
    changed = set_maintenance(engine, unit.id, on, int(time.time() * 1000), text)
    state = "in maintenance" if on else "out of maintenance"
    click.echo(f"{unit.site}/{unit.info.key}: {state}" + ("" if changed else " (already)"))
