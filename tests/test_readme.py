"""README.md is held to the code: its measure table is the registry's, and every command of the
command line has a working ``--help`` and is documented there."""

from __future__ import annotations

from pathlib import Path

import click
import pytest
from click.testing import CliRunner

from monitor.cli import main
from monitor.measures import registry
from monitor.measures.catalog import README_END, README_START, readme_table

README = Path(__file__).resolve().parent.parent / "README.md"


def test_the_measures_table_is_the_registry():
    text = README.read_text(encoding="utf-8")
    start, end = text.index(README_START), text.index(README_END) + len(README_END)
    assert text[start:end] == readme_table(), (
        "README.md's measure table differs from the registry: run `python -m monitor.measures --readme README.md`")
    for m in registry.measures():
        assert f"| `{m.name}` |" in text[start:end], m.name


def _commands(group: click.Group, path: tuple[str, ...] = ()):
    # through click's own listing: a group may make its commands when asked (export does)
    ctx = click.Context(group)
    for name in sorted(group.list_commands(ctx)):
        command = group.get_command(ctx, name)
        yield (*path, name)
        if isinstance(command, click.Group):
            yield from _commands(command, (*path, name))


COMMANDS = list(_commands(main))


def test_the_walk_finds_every_command():
    assert {"load", "compute", "publish", "watch", "verify", "export"} <= {c[0] for c in COMMANDS}
    assert ("export", "measures") in COMMANDS and len(COMMANDS) >= 14


@pytest.mark.parametrize("path", COMMANDS, ids=" ".join)
def test_every_command_has_help_and_is_documented_in_the_readme(path):
    result = CliRunner().invoke(main, [*path, "--help"])
    assert result.exit_code == 0, result.output
    assert result.output.startswith("Usage: ") and f" {' '.join(path)} " in result.output.splitlines()[0]
    assert "Options:" in result.output and "--help" in result.output
    command = main
    for name in path:
        command = command.get_command(None, name)
    assert (command.help or "").strip(), f"levelfield {' '.join(path)} has no help text"
    text = README.read_text(encoding="utf-8")
    assert f"levelfield {' '.join(path)}" in text, f"README.md does not document `levelfield {' '.join(path)}`"
