"""The help of every command reads as the README writes it: plain usage line, no value on flags.

typer 0.29 prints required arguments as ``{model}`` (like our path-template fields) and a type
such as ``<bool>`` beside flags that take no value; shots.cli_help undoes both.
"""

import re

import pytest
import typer
from typer.testing import CliRunner

from shots import docs
from shots.cli import app

GROUP = typer.main.get_command(app)


def commands() -> dict:
    """Every command by name; a group's (``shots preset``) as "preset show"."""
    found = {}
    for name, command in GROUP.commands.items():
        if hasattr(command, "commands"):
            found.update({f"{name} {sub}": c for sub, c in command.commands.items()})
        else:
            found[name] = command
    return found


COMMANDS = sorted(commands())
USAGE = {  # the positional arguments each command takes, in order
    "batch": "SOURCE",
    "check": "RENDERS",
    "demo": "",
    "plan": "PRESET MODEL",
    "preset schema": "",
    "preset show": "PRESET",
    "render": "MODEL",
}
TYPE_TAG = re.compile(r"<\w[\w\[\], |]*>")  # typer's own value labels: <bool>, <path>, <list[str]>
runner = CliRunner(env={"COLUMNS": "200", "NO_COLOR": "1"})


def help_text(*args: str) -> str:
    result = runner.invoke(app, [*args, "--help"], prog_name="shots")
    assert result.exit_code == 0, result.output
    return result.output


def usage_line(text: str) -> str:
    return next(line.strip() for line in text.splitlines() if "Usage:" in line)


def test_every_command_is_covered():
    assert sorted(USAGE) == COMMANDS


def test_top_level_help_lists_every_command_and_no_value_on_help():
    text = help_text()
    assert usage_line(text) == "Usage: shots [OPTIONS] COMMAND [ARGS]..."
    assert "<bool>" not in text
    for name in {c.split()[0] for c in COMMANDS}:
        assert re.search(rf"^\W*{name}\s+\S", text, re.MULTILINE), name


@pytest.mark.parametrize("name", COMMANDS)
def test_usage_line_names_arguments_as_the_readme_does(name):
    expected = f"Usage: shots {name} [OPTIONS] {USAGE[name]}".rstrip()
    assert usage_line(help_text(*name.split())) == expected
    readme_usage = docs.command_reference(name, commands()[name])[2].strip()
    assert expected == "Usage: " + readme_usage  # the generated README reference agrees
    assert not set("{}") & set(expected)


@pytest.mark.parametrize("name", COMMANDS)
def test_options_show_their_metavar_and_flags_show_none(name):
    text = help_text(*name.split())
    assert "<bool>" not in text
    options = [p for p in commands()[name].params if p.param_type_name == "option"]
    assert options
    for option in options:
        long = max(option.opts, key=len)
        row = next(line for line in text.splitlines() if re.search(rf"^\W*{re.escape(long)}\b", line))
        assert not TYPE_TAG.search(row), row
        after = row.split(long, 1)[1]
        after = re.sub(r"^\s+-\w\b", "", after)  # the short form, if any
        first = after.split()[0]
        if option.is_flag:
            assert option.metavar == "" and first[0].isupper() and first != first.upper(), row
        else:
            assert option.metavar and first == option.metavar, row
