"""The ``rimewatch`` command line: one click group, one module per subcommand.

Subcommands are imported only when called, so ``rimewatch --help`` stays fast even though the
commands themselves pull in pandas, SQLAlchemy and, where they compute properties, CoolProp.
"""

from __future__ import annotations

import importlib

import click

from rimewatch import __version__

# name -> ("module:attribute" of a click command, its one-line summary for `rimewatch --help`;
# tests/shell/test_cli.py checks each summary against the command's own docstring)
COMMANDS: dict[str, tuple[str, str]] = {
    "analyze": (
        "rimewatch.commands.analyze:analyze",
        "Detect and diagnose faults in each unit's stored readings over a period.",
    ),
    "apply": (
        "rimewatch.commands.apply:apply",
        "Create or update the site, its units and points from SITE_FILE.",
    ),
    "baseline": (
        "rimewatch.commands.baseline:baseline",
        "Fit UNIT's fault-free reference models on a period you know was fault-free.",
    ),
    "commission": (
        "rimewatch.commands.commission:commission",
        "Check each unit's wiring, units and refrigerant against the physics of its cycle.",
    ),
    "cycle": (
        "rimewatch.commands.cycle:cycle",
        "Rebuild one refrigerant cycle from gauge and probe readings.",
    ),
    "demo": (
        "rimewatch.commands.demo:demo",
        "Simulate an invented site for a few weeks and run it through the whole pipeline.",
    ),
    "faults": (
        "rimewatch.commands.faults:faults",
        "List fault events, newest first, with severity, confidence and impact.",
    ),
    "import": (
        "rimewatch.commands.import_csv:import_command",
        "Import CSV_FILE, a trend-log export, using the columns and format of SITE_FILE.",
    ),
    "init": (
        "rimewatch.commands.init:init",
        "Write a commented example site description to PATH (default site.yaml).",
    ),
    "listen": (
        "rimewatch.commands.listen:listen",
        "Store every reading the site's MQTT topics deliver; quarantine what cannot be read.",
    ),
    "map": (
        "rimewatch.commands.map:map_group",
        "Compressor maps (AHRI 540 ten-coefficient polynomials).",
    ),
    "points": (
        "rimewatch.commands.points:points",
        "List each mapped point with its last value (in the site's display units) and its age.",
    ),
    "quarantine": (
        "rimewatch.commands.quarantine:quarantine",
        "Input that could not become readings (bad payloads, bad CSV cells and lines).",
    ),
    "simulate": (
        "rimewatch.commands.simulate:simulate",
        "Simulate one air-cooled unit minute by minute, with optional injected faults.",
    ),
}


class LazyGroup(click.Group):
    """A click group whose subcommands are imported on first use.

    The command list in ``--help`` comes from the registered summaries, so it imports nothing.
    """

    def list_commands(self, ctx: click.Context) -> list[str]:
        return sorted(COMMANDS)

    def get_command(self, ctx: click.Context, cmd_name: str) -> click.Command | None:
        if cmd_name not in COMMANDS:
            return None
        module_name, attribute = COMMANDS[cmd_name][0].split(":")
        return getattr(importlib.import_module(module_name), attribute)

    def format_commands(self, ctx: click.Context, formatter: click.HelpFormatter) -> None:
        rows = [(name, COMMANDS[name][1]) for name in self.list_commands(ctx)]
        with formatter.section("Commands"):
            formatter.write_dl(rows)


@click.group(cls=LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="rimewatch")
def main() -> None:
    """Rebuild refrigeration circuits' cycles from their sensors and find developing faults."""
