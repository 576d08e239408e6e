"""The ``rimewatch`` command line: one click group, one module per subcommand.

Subcommands are imported only when called, so ``rimewatch --help`` stays fast even though the
commands themselves pull in CoolProp, pandas and SQLAlchemy.
"""

from __future__ import annotations

import importlib

import click

from rimewatch import __version__

# name -> "module:attribute" of a click command
COMMANDS: dict[str, str] = {
    "cycle": "rimewatch.commands.cycle:cycle",
    "demo": "rimewatch.commands.demo:demo",
    "listen": "rimewatch.commands.listen:listen",
    "map": "rimewatch.commands.map:map_group",
    "init": "rimewatch.commands.init:init",
    "apply": "rimewatch.commands.apply:apply",
    "import": "rimewatch.commands.import_csv:import_command",
    "points": "rimewatch.commands.points:points",
    "simulate": "rimewatch.commands.simulate:simulate",
    "quarantine": "rimewatch.commands.quarantine:quarantine",
    "commission": "rimewatch.commands.commission:commission",
    "analyze": "rimewatch.commands.analyze:analyze",
    "baseline": "rimewatch.commands.baseline:baseline",
    "faults": "rimewatch.commands.faults:faults",
}


class LazyGroup(click.Group):
    """A click group whose subcommands are imported on first use."""

    def list_commands(self, ctx: click.Context) -> list[str]:
        return sorted(COMMANDS)

    def get_command(self, ctx: click.Context, cmd_name: str) -> click.Command | None:
        target = COMMANDS.get(cmd_name)
        if target is None:
            return None
        module_name, attribute = target.split(":")
        return getattr(importlib.import_module(module_name), attribute)


@click.group(cls=LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="rimewatch")
def main() -> None:
    """Rebuild refrigeration circuits' cycles from their sensors and find developing faults."""
