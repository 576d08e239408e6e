"""``rimewatch commission``: prove a unit's wiring, units and refrigerant before detection."""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path

import click

from rimewatch.commands._store_common import db_option, load_site_file, open_database

NO_GO_EXIT_STATUS = 3  # any unit NO-GO; distinct from 1 (bad input) and 2 (usage error)

_VERDICT_STYLE = {
    "consistent": "green",
    "suspect": "yellow",
    "contradicts": "bold red",
    "unchecked": "dim",
}


def _unit_spec(unit):
    from rimewatch.report.commission import PointSpec, UnitSpec

    points = tuple(PointSpec(p.role, p.unit, p.mqtt_topic, p.csv_column) for p in unit.points)
    return UnitSpec(unit.id, unit.name, unit.kind, unit.refrigerant, points)


def _parse_since(since: str | None):
    import pandas as pd

    if since is None:
        return pd.Timestamp(0, tz="UTC")
    try:
        stamp = pd.Timestamp(since)
    except ValueError:
        raise click.ClickException(
            f"--since {since!r} is not a date or time (ISO 8601, e.g. 2025-06-01 or "
            "2025-06-01T08:00+02:00)"
        ) from None
    return stamp.tz_localize("UTC") if stamp.tzinfo is None else stamp.tz_convert("UTC")


def read_csv_frames(path: Path, config, units) -> tuple[dict, dict]:
    """Each unit's readings from a trend-log CSV, by role, in SI (no database involved).

    Returns ``(frames by unit id, {(unit id, role): count of cells that could not be read})``;
    unreadable cells become NaN and are counted so the report can say so.
    """
    import numpy as np
    import pandas as pd

    from rimewatch.ingest.units import to_si

    settings = config.csv
    try:
        table = pd.read_csv(
            path,
            sep=settings.delimiter,
            decimal=settings.decimal,
            encoding=settings.encoding,
            dtype=str,
            keep_default_na=False,
        )
    except (OSError, UnicodeDecodeError, pd.errors.ParserError) as exc:
        raise click.ClickException(f"{path}: cannot read the CSV file: {exc}") from None
    if settings.timestamp_column not in table:
        raise click.ClickException(
            f"{path}: no timestamp column {settings.timestamp_column!r} "
            f"(columns: {', '.join(table.columns)})"
        )
    raw_stamps = table[settings.timestamp_column].str.strip()
    with_offset = bool(raw_stamps.str.contains(r"(?:Z|[+-]\d\d:?\d\d)$", regex=True).any())
    stamps = pd.to_datetime(
        raw_stamps,
        format=settings.timestamp_format or "ISO8601",
        errors="coerce",
        utc=with_offset,
    )
    if stamps.dt.tz is None:
        stamps = stamps.dt.tz_localize(
            config.csv_timezone, nonexistent="shift_forward", ambiguous="NaT"
        )
    stamps = stamps.dt.tz_convert("UTC")
    keep = stamps.notna().to_numpy()
    if not keep.any():
        raise click.ClickException(
            f"{path}: no timestamp in column {settings.timestamp_column!r} could be read"
        )
    missing = set(settings.missing_values)
    frames, unreadable = {}, {}
    for unit in units:
        columns = {}
        for point in unit.points:
            if point.csv_column is None or point.csv_column not in table:
                continue
            cells = table[point.csv_column][keep]
            blank = cells.isin(missing).to_numpy()
            if point.unit == "on/off":
                values = np.asarray(to_si(cells.to_numpy(object), point.unit), float)
            else:
                numbers = pd.to_numeric(cells.str.strip(), errors="coerce").to_numpy(float)
                values = np.asarray(
                    to_si(numbers, point.unit, config.atmospheric_pressure_Pa), float
                )
            values[blank] = np.nan
            bad = int((~blank & ~np.isfinite(values)).sum())
            if bad:
                unreadable[(unit.id, point.role)] = bad
            columns[point.role] = values
        frame = pd.DataFrame(columns, index=pd.DatetimeIndex(stamps[keep], name="ts"))
        frames[unit.id] = frame[~frame.index.duplicated()].sort_index()
    return frames, unreadable


def _print_report(console, report) -> None:
    from rich.panel import Panel
    from rich.table import Table

    unit = report.unit
    decision = (
        "[bold green]GO[/]: detection can be switched on"
        if report.go
        else "[bold red]NO-GO[/]: keep detection off"
    )
    console.rule(f"{unit.id} - {unit.name} ({unit.refrigerant} as configured)")
    console.print(decision)
    for blocker in report.blockers:
        console.print(f"  - {blocker}")
    if report.result is not None:
        assignment = report.result.assignment
        table = Table(title="Points", show_lines=False)
        for header in ("point", "verdict", "measures", "evidence"):
            table.add_column(header, overflow="fold")
        for sensor, verdict in assignment.point_verdicts().items():
            measures = verdict.role + (
                f" ({verdict.unit_fix.replace('_', ' ')})" if verdict.unit_fix else ""
            )
            table.add_row(
                sensor,
                f"[{_VERDICT_STYLE[verdict.verdict]}]{verdict.verdict}[/]",
                measures,
                f"{len(verdict.evidence)} checks hold (details in the HTML report)"
                if verdict.verdict == "consistent"
                else "\n".join(verdict.evidence[:3]),
            )
        console.print(table)
        console.print(Panel(assignment.explanation(), title="Assignment", expand=False))
        check = report.result.refrigerant_check
        style = _VERDICT_STYLE[check.verdict]
        console.print(f"Refrigerant: [{style}]{check.verdict}[/] - {check.explanation}")
    if report.corrections_yaml:
        console.print(Panel(report.corrections_yaml.rstrip(), title="Suggested site-file changes"))
    coverage = Table(title=f"Data coverage (grid {report.grid_interval_s:.0f} s)")
    for header in ("point", "unit", "readings", "coverage", "interval [s]"):
        coverage.add_column(header)
    for row in report.coverage:
        coverage.add_row(
            row.role, row.unit, str(row.samples), f"{row.coverage:.0%}", f"{row.interval_s:.0f}"
        )
    console.print(coverage)
    for note in report.notes:
        console.print(f"  note: {note}")
    console.print("[bold]Safety[/]")
    for note in report.cautions:
        console.print(f"  ! {note}")


@click.command("commission")
@click.argument("site_file", type=click.Path(dir_okay=False))
@click.option("--unit", "unit_id", default=None, help="Check only this unit (its id).")
@click.option(
    "--since",
    default=None,
    metavar="TIME",
    help="Use readings from TIME on (ISO 8601; UTC when no offset). Default: all stored.",
)
@click.option(
    "--csv",
    "csv_file",
    default=None,
    type=click.Path(dir_okay=False),
    help="Read a trend-log CSV (columns and format from SITE_FILE) instead of the database.",
)
@click.option(
    "--out",
    "out_dir",
    default=".",
    show_default=True,
    type=click.Path(file_okay=False),
    help="Folder for the HTML reports (commission-<unit>.html).",
)
@db_option
def commission(site_file, unit_id, since, csv_file, out_dir, db_url):
    """Check each unit's wiring, units and refrigerant against the physics of its cycle.

    Finds swapped sensors (e.g. suction and discharge transducers, a liquid-line sensor labelled
    suction), gauge pressures logged as absolute, degF labelled degC, and a refrigerant that
    contradicts the standstill pressures. Prints each point's verdict with its evidence and the
    suggested site-file corrections, writes an HTML report per unit, and says GO or NO-GO for
    switching detection on. Needs running data and at least one standstill of 30 minutes.

    Exit status (for scripts and CI pipelines):

    \b
        0  every unit checked is GO
        3  at least one unit is NO-GO (the reports say why)
        1  bad input (site file, CSV, database, --since); 2 usage error

    Example:

    \b
        rimewatch commission site.yaml --unit rtu-1 --since 2025-06-01
        rimewatch commission site.yaml --csv exports/rtu1-week.csv --out reports/
        rimewatch commission site.yaml --csv week.csv || echo "keep detection off"
    """
    import pandas as pd
    from rich.console import Console

    from rimewatch.report.commission import build_unit_report, render_html

    config = load_site_file(site_file)
    try:
        units = [config.unit(unit_id)] if unit_id else list(config.units)
    except KeyError as exc:
        raise click.ClickException(f"{site_file}: {exc.args[0]}") from None
    start = _parse_since(since)
    unreadable = {}
    if csv_file is not None:
        path = Path(csv_file)
        if not path.is_file():
            raise click.ClickException(f"{path}: no such file")
        frames, unreadable = read_csv_frames(path, config, units)
        frames = {key: frame[frame.index >= start] for key, frame in frames.items()}
    else:
        from rimewatch.store.catalog import find_unit_id
        from rimewatch.store.readings import FrameReader

        engine = open_database(db_url)
        end = pd.Timestamp.now(tz="UTC") + pd.Timedelta(days=1)
        keys = {unit.id: find_unit_id(engine, config.site.name, unit.id) for unit in units}
        for unit_id, key in keys.items():
            if key is None:
                raise click.ClickException(
                    f"unit {unit_id!r} of site {config.site.name!r} is not in the database: run "
                    f"`rimewatch apply {site_file}` and import data, or pass --csv FILE"
                )
        with FrameReader(engine) as reader:
            frames = {unit_id: reader.read(key, start, end) for unit_id, key in keys.items()}
    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise click.ClickException(f"cannot create {out}: {exc}") from None
    console = Console()
    generated = datetime.now(UTC)
    all_go = True
    for unit in units:
        report = build_unit_report(
            _unit_spec(unit), frames[unit.id], config.atmospheric_pressure_Pa
        )
        report.notes += [
            f"{role}: {count} CSV cells could not be read"
            for (uid, role), count in unreadable.items()
            if uid == unit.id
        ]
        all_go = all_go and report.go
        _print_report(console, report)
        target = out / f"commission-{unit.id}.html"
        target.write_text(render_html([report], config.site.name, generated), encoding="utf-8")
        console.print(f"report: {target}")
    if not all_go:
        click.get_current_context().exit(NO_GO_EXIT_STATUS)
