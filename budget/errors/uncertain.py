"""Values with an uncertainty or a drift rate in the error-model file (docs/error-model.md).

Any number under ``[qubits...]``, ``[gates...]`` or the context sections (``[couplings...]``,
``[crosstalk...]``, ``[bleed...]``, ``[[context]]``) (a knob, T1/T2, readout, error rates, a ZZ rate, one
entry of a ``z_phase`` list or a ``pauli`` table) may be written as a small table::

    overrotation = { value = 0.002, sigma = 0.0005 }            # normal, mean 0.002, std 0.0005
    t1_us = { low = 80.0, high = 120.0 }                        # uniform on [80, 120]
    cphase = { value = 0.03, sigma = 0.004, drift_per_hour = 0.002 }

:func:`central_values` replaces each such table by its central value (``value``, or the midpoint
of ``low``/``high``) so every command reads the model as before, and returns the
:class:`Spread` of each, which ``budget sweep`` draws from. ``drift_per_hour`` (model units per
hour, >= 0) is a linear drift of unknown direction, as in ``[calibration.drift_rad_per_hour]``.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Any, Mapping

from scipy import stats

from budget.errors.toml_keys import KeyPaths

PARTS = ("value", "sigma", "low", "high", "drift_per_hour")
UNCERTAIN_SECTIONS = ("qubits", "gates", "couplings", "crosstalk", "bleed", "context")  # sections whose numbers may carry a spread


@dataclass(frozen=True)
class Spread:
    """The uncertainty of one model value.

    Attributes:
        path: key path in the model dict, e.g. ``("gates", "cz", "z_phase", "1")`` (list index as text).
        center: the value every other command uses.
        sigma: standard deviation of a normal distribution (None: not normal).
        low, high: bounds of a uniform distribution (None: not uniform).
        drift_per_hour: drift rate in the value's unit per hour (0: none).
    """

    path: tuple[str, ...]
    center: float
    sigma: float | None = None
    low: float | None = None
    high: float | None = None
    drift_per_hour: float = 0.0

    @property
    def random(self) -> bool:
        """True when the value is uncertain now (not only drifting)."""
        return bool(self.sigma) or self.low is not None

    def ppf(self, u: Any) -> Any:
        """The value at quantile(s) ``u`` in (0, 1) (inverse transform sampling)."""
        if self.low is not None:
            return stats.uniform.ppf(u, loc=self.low, scale=self.high - self.low)
        if self.sigma:
            return stats.norm.ppf(u, loc=self.center, scale=self.sigma)
        return self.center + 0.0 * u


def is_spread(value: Any) -> bool:
    """A table that describes one uncertain number (as opposed to a qubit or gate table)."""
    return isinstance(value, Mapping) and bool(value) and set(value) <= set(PARTS) and \
        ("value" in value or "low" in value or "high" in value)


def central_values(data: Mapping[str, Any], source: str) -> tuple[dict, tuple[Spread, ...]]:
    """The model dict with every uncertainty table replaced by its central value, and the spreads.

    Raises:
        ModelError: a malformed uncertainty table (message names the key path, value, file, rule).
    """
    spreads: list[Spread] = []
    fail = KeyPaths(source).fail

    def walk(value: Any, path: tuple[str, ...]) -> Any:
        if is_spread(value):
            spread = _spread(value, path, fail)
            spreads.append(spread)
            return spread.center if isinstance(value.get("value", 0.0), numbers.Real) or "value" not in value \
                else value["value"]  # a non-number value: the model's own rule names it
        if isinstance(value, Mapping):
            return {k: walk(v, path + (str(k),)) for k, v in value.items()}
        if isinstance(value, list):
            return [walk(v, path + (str(i),)) for i, v in enumerate(value)]
        return value

    out = {k: (walk(v, (k,)) if k in UNCERTAIN_SECTIONS else v) for k, v in data.items()}
    return out, tuple(spreads)


def _number(table: Mapping, part: str, path: tuple[str, ...], fail) -> float | None:
    if part not in table:
        return None
    v = table[part]
    if isinstance(v, bool) or not isinstance(v, numbers.Real) or not math.isfinite(v):
        raise fail(path + (part,), v, "expected a finite number")
    return float(v)


def _spread(table: Mapping, path: tuple[str, ...], fail) -> Spread:
    value = table.get("value")
    sigma = _number(table, "sigma", path, fail)
    low, high = _number(table, "low", path, fail), _number(table, "high", path, fail)
    drift = _number(table, "drift_per_hour", path, fail) or 0.0
    if (low is None) != (high is None):
        raise fail(path, dict(table), "a uniform uncertainty needs both low and high")
    if low is not None and (sigma is not None or "value" in table):
        raise fail(path, dict(table), "give either { value, sigma } (normal) or { low, high } (uniform), not both")
    if low is not None and not low < high:
        raise fail(path, dict(table), f"needs low < high, got low = {low:g}, high = {high:g}")
    if sigma is not None and sigma < 0:
        raise fail(path + ("sigma",), sigma, "a standard deviation must not be negative")
    if drift < 0:
        raise fail(path + ("drift_per_hour",), drift, "a drift rate must not be negative (its direction is unknown)")
    if low is not None:
        return Spread(path, (low + high) / 2, None, low, high, drift)
    center = float(value) if isinstance(value, numbers.Real) and not isinstance(value, bool) else math.nan
    return Spread(path, center, sigma, None, None, drift)
