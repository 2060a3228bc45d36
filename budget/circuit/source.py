"""Reading circuit files: one place for the missing-file and unreadable-file messages."""

from __future__ import annotations

from pathlib import Path

from budget.problems import InputError


def read_text(path: str | Path) -> str:
    """The text of a circuit file (UTF-8).

    Raises:
        InputError: ``<path>: circuit file not found`` or ``<path>: cannot read the circuit file``.
    """
    p = Path(path)
    try:
        return p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(f"{p}: circuit file not found") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{p}: cannot read the circuit file: {exc}") from None
