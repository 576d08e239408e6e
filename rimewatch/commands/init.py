"""``rimewatch init``: write a commented example site file."""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path

import click


@click.command()
@click.argument("path", default="site.yaml", type=click.Path(dir_okay=False))
@click.option("--force", is_flag=True, help="Overwrite PATH if it exists.")
def init(path, force):
    """Write a commented example site description to PATH (default site.yaml).

    The example is an invented grocery with a rooftop unit (R410A), a CO2 freezer condensing
    unit and a propane split system. Edit it for your site, then load it with `rimewatch apply`.

    Example:

    \b
        rimewatch init my-site.yaml
        rimewatch apply my-site.yaml
    """
    target = Path(path)
    if target.exists() and not force:
        raise click.ClickException(f"{target} exists; pass --force to overwrite it")
    text = files("rimewatch").joinpath("example_site.yaml").read_text(encoding="utf-8")
    try:
        target.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise click.ClickException(f"cannot write {target}: {exc.strerror}") from None
    click.echo(f"wrote {target}; edit it, then run: rimewatch apply {target}")
