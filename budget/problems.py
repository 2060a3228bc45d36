"""The exceptions users see, with one message template (style.md §4).

Every message names the place (``file:line`` or the TOML key), the value, and the rule:
"gates.cz.cphase = 'abc' in lab.toml: expected a number in radians". The CLI prints the message as
one red line on stderr and exits non-zero; no traceback.
"""

from __future__ import annotations


class InputError(ValueError):
    """Bad input: a malformed circuit, an unknown gate, an unphysical or mistyped model value."""


class CircuitSyntaxError(InputError):
    """A circuit file that cannot be read; the message starts with ``file:line``."""


class ModelError(InputError):
    """An error-model value that breaks a rule; the message names the TOML key and the file."""


class TooLargeError(InputError):
    """The circuit does not fit the chosen engine; the message says which engine would fit."""


def place(source: str, line: int | None) -> str:
    """``file:line`` or just ``file`` when the line is unknown."""
    return f"{source}:{line}" if line is not None else source
