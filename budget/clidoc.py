"""Generate docs/cli.md from the commands' own ``--help`` (so the reference never drifts).

    python -m budget.clidoc > docs/cli.md

tests/test_cli_doc.py fails when docs/cli.md differs from what this prints.
"""

from __future__ import annotations

import typer.main
from typer.testing import CliRunner

from budget.cli import app

WIDTH = 100


def _help(*args: str) -> str:
    result = CliRunner().invoke(
        app, [*args, "--help"], prog_name="budget", env={"COLUMNS": str(WIDTH), "TERM": "dumb", "NO_COLOR": "1"}, color=False
    )
    return "\n".join(line.rstrip() for line in result.output.splitlines()).strip("\n")


def command_names() -> list[str]:
    group = typer.main.get_command(app)
    return list(group.commands)  # type: ignore[attr-defined]


def _subcommands(name: str) -> list[str]:
    """The commands of a command group (``budget model import``), else none."""
    group = typer.main.get_command(app)
    return list(getattr(group.commands[name], "commands", {}))  # type: ignore[attr-defined]


def render() -> str:
    parts = [
        "# Command reference",
        "",
        "Generated from `--help` by `python -m budget.clidoc > docs/cli.md`; do not edit by hand.",
        "",
        "## budget",
        "",
        "```text",
        _help(),
        "```",
    ]
    for name in command_names():
        parts += ["", f"## budget {name}", "", "```text", _help(name), "```"]
        for sub in _subcommands(name):
            parts += ["", f"## budget {name} {sub}", "", "```text", _help(name, sub), "```"]
    return "\n".join(parts) + "\n"


if __name__ == "__main__":  # pragma: no cover
    print(render(), end="")
