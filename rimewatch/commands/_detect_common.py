"""Shared by the detection commands: times, unit selection and the tariff option."""

from __future__ import annotations

import click

tariff_option = click.option(
    "--tariff",
    "tariff",
    type=float,
    default=None,
    metavar="PRICE",
    help="Energy price per kWh for the cost figures (default: $RIMEWATCH_TARIFF, else 0.25).",
)


def parse_time(text: str | None, option: str, default=None):
    """ISO 8601 date/time (UTC when no offset is given) -> UTC Timestamp."""
    import pandas as pd

    if text is None:
        return default
    try:
        stamp = pd.Timestamp(text)
    except ValueError:
        raise click.ClickException(
            f"{option} {text!r} is not a date or time (ISO 8601, e.g. 2026-07-01 or "
            "2026-07-01T08:00+02:00)"
        ) from None
    if stamp is pd.NaT:
        raise click.ClickException(f"{option} {text!r} is not a date or time")
    return stamp.tz_localize("UTC") if stamp.tzinfo is None else stamp.tz_convert("UTC")


def resolve_tariff(tariff: float | None) -> float:
    import math
    import os

    if tariff is None:
        text = os.environ.get("RIMEWATCH_TARIFF")
        try:
            tariff = float(text) if text else 0.25
        except ValueError:
            raise click.ClickException(f"RIMEWATCH_TARIFF={text!r} is not a number") from None
    if not math.isfinite(tariff) or tariff < 0:
        raise click.ClickException(f"tariff {tariff} must be a number >= 0")
    return tariff


def select_units(engine, unit_key: str | None, site: str | None):
    from rimewatch.detection import DetectionError, stored_units

    try:
        units = stored_units(engine, unit_key, site)
    except DetectionError as exc:
        raise click.ClickException(str(exc)) from None
    if not units:
        raise click.ClickException("no units in the database (run `rimewatch apply SITE.yaml`)")
    return units
