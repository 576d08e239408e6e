"""``rimewatch baseline``: fit a unit's fault-free reference models on a period."""

from __future__ import annotations

import click

from rimewatch.commands._detect_common import parse_time, select_units
from rimewatch.commands._store_common import db_option, open_database


@click.command()
@click.argument("unit_key", metavar="UNIT")
@click.option(
    "--site", "site_name", default=None, help="The unit's site, when its id is not unique."
)
@click.option("--from", "start", required=True, help="Start of the fault-free period (ISO 8601).")
@click.option("--to", "end", required=True, help="End of the period, exclusive (ISO 8601).")
@db_option
def baseline(unit_key, site_name, start, end, db_url):
    """Fit UNIT's fault-free reference models on a period you know was fault-free.

    Each feature (evaporating and condensing temperatures, superheat, subcooling, discharge
    temperature, air temperature changes, virtual sensors) is modelled from the driving
    conditions (outdoor air, return air temperature and humidity, compressor speed). A week or
    two of ordinary running is enough; the models judge only inside (or just beyond) the weather
    they were fitted on. The models are stored as plain JSON and replace the unit's previous
    baseline for later `rimewatch analyze` runs.

    Example:

    \b
        rimewatch baseline rtu-1 --from 2026-06-01 --to 2026-06-15
    """
    import time

    from rimewatch.detect.reference import BaselineError
    from rimewatch.detection import DetectionError, fit_and_store_baseline

    begin, finish = parse_time(start, "--from"), parse_time(end, "--to")
    if not begin < finish:
        raise click.ClickException(f"--from {begin} must be before --to {finish}")
    engine = open_database(db_url)
    (unit,) = select_units(engine, unit_key, site_name)
    try:
        fitted = fit_and_store_baseline(engine, unit, begin, finish, int(time.time() * 1000))
    except (BaselineError, DetectionError, ValueError) as exc:
        raise click.ClickException(str(exc)) from None
    click.echo(
        f"{unit.site}/{unit.info.key}: baseline "
        f"{begin:%Y-%m-%d %H:%M}Z .. {finish:%Y-%m-%d %H:%M}Z, "
        f"drivers {', '.join(fitted.drivers)}"
    )
    click.echo(f"  {'feature':<28} {'samples':>8} {'hours':>6} {'sigma':>10} {'sigma(h)':>10}")
    for name, model in fitted.models.items():
        click.echo(
            f"  {name:<28} {model.samples:>8} {model.hours:>6} {model.sigma:>10.4g} "
            f"{model.sigma_hourly:>10.4g}"
        )
    for note in fitted.notes:
        click.echo(f"  note: {note}")
