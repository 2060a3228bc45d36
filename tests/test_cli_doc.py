"""docs/cli.md is generated from --help and must match it (style: docs quote the code)."""

from pathlib import Path

from budget.clidoc import render

DOC = Path(__file__).resolve().parent.parent / "docs" / "cli.md"


def test_cli_reference_is_current():
    assert DOC.read_text() == render(), "regenerate with: python -m budget.clidoc > docs/cli.md"
