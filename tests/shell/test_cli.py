"""The command line as a whole: every registered command loads, documents itself and shows up."""

import pytest
from click.testing import CliRunner

from rimewatch.cli import COMMANDS, main


@pytest.mark.parametrize("name", sorted(COMMANDS))
def test_every_command_has_help_with_an_example(name):
    command = main.get_command(None, name)
    assert command is not None, f"{name} does not load"
    assert command.help and len(command.help.strip()) > 20, f"{name} is missing its help"
    result = CliRunner().invoke(main, [name, "--help"])
    assert result.exit_code == 0, result.output
    text = result.output
    subcommands = getattr(command, "commands", {})
    assert "Example" in text or subcommands, f"{name} --help shows no example"


@pytest.mark.parametrize("name", sorted(COMMANDS))
def test_registered_summary_is_the_first_line_of_the_commands_help(name):
    command = main.get_command(None, name)
    assert COMMANDS[name][1] == command.help.strip().splitlines()[0]


def test_top_level_help_lists_every_command():
    result = CliRunner().invoke(main, ["--help"])
    assert result.exit_code == 0
    for name, (_, summary) in COMMANDS.items():
        assert name in result.output
        assert summary.split()[0] in result.output


def test_unknown_command_is_one_clear_line():
    result = CliRunner().invoke(main, ["defrost-everything"])
    assert result.exit_code != 0
    assert "No such command" in result.output
    assert "Traceback" not in result.output
