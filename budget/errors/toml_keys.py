"""One way to report a bad value in the error-model file: its key path, the value, the file, the rule.

Every part of the file uses it: the gate and qubit tables and context sections
(:mod:`budget.errors.model`, :mod:`budget.errors.context`), uncertainty tables
(:mod:`budget.errors.uncertain`) and the ``[calibration]`` table
(:mod:`budget.analysis.calibration`), so one fault reads the same wherever it occurs:

    gates.sx.overrotaton = 0.002 in lab.toml: unknown key; did you mean 'overrotation'? valid keys here: ...
    calibration.sigma_factr = 2 in lab.toml: unknown key; did you mean 'sigma_factor'? valid keys here: ...

Template: ``KEY.PATH = VALUE in FILE: RULE`` (docs/error-model.md), the value shortened to 60
characters.
"""

from __future__ import annotations

import difflib
import math
import numbers
from typing import Any, Mapping, Sequence

from budget.errors.params import key_path, show
from budget.problems import ModelError


class KeyPaths:
    """Builds the messages (and checks the plain value kinds) for one file.

    >>> KeyPaths("lab.toml").fail(("gates", "cz", "cphase"), "abc", "expected a number").args[0]
    "gates.cz.cphase = 'abc' in lab.toml: expected a number"
    """

    def __init__(self, source: str):
        self.source = source

    def fail(self, path: Sequence[str], value: Any, rule: str) -> ModelError:
        """The error for ``value`` at ``path`` breaking ``rule``."""
        return ModelError(f"{key_path(tuple(path))} = {show(value)} in {self.source}: {rule}")

    def table(self, path: Sequence[str], value: Any) -> Mapping[str, Any]:
        """``value`` when it is a table, else the error "expected a table"."""
        if not isinstance(value, Mapping):
            raise self.fail(path, value, "expected a table")
        return value

    def unknown(self, path: Sequence[str], value: Any, valid: Sequence[str], what: str = "unknown key",
                listing: str = "valid keys here") -> ModelError:
        """The error for a key that is not one of ``valid`` (the closest one suggested)."""
        close = difflib.get_close_matches(path[-1], valid, n=1)
        hint = f"did you mean {close[0]!r}? " if close else ""
        return self.fail(path, value, f"{what}; {hint}{listing}: {', '.join(valid)}")

    def flag(self, path: Sequence[str], value: Any) -> bool:
        """A TOML boolean."""
        if not isinstance(value, bool):
            raise self.fail(path, value, "expected true or false")
        return value

    def number(self, path: Sequence[str], value: Any, rule: str, *, low: float = -math.inf,
               strict: bool = False, whole: bool = False) -> float:
        """A finite real number (bool refused) >= ``low`` (> with ``strict``), a whole number with
        ``whole``; the error states ``rule`` (e.g. "expected a number of µs >= 0")."""
        ok = isinstance(value, numbers.Real) and not isinstance(value, bool) and math.isfinite(value)
        ok = ok and (value > low if strict else value >= low) and (not whole or value == int(value))
        if not ok:
            raise self.fail(path, value, rule)
        return int(value) if whole else float(value)
