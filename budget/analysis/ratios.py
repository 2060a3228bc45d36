"""Ratios that mean something: no quotient of two numbers at rounding level.

An infidelity computed in double precision from products of matrices close to the identity carries
an absolute rounding error of many units of roundoff (u = 2**-53 ≈ 1.1e-16) times the scale of the
numbers involved (1 for a fidelity). A value below :data:`ROUNDING_FLOOR` × scale is therefore
indistinguishable from zero, and a ratio with such a value in the denominator ("3.56e+13" from
9.6e-2 / 2.7e-15) is rounding noise, not a ratio. The floor of 1e-12 (about 10^4 u) covers the
rounding accumulated over thousands of matrix products (common practice, no source).

    >>> safe_ratio(0.02, 0.01).value
    2.0
    >>> safe_ratio(0.02, 2.7e-15).value is None
    True
    >>> safe_ratio(3e-16, 2.7e-15).why
    'both at rounding level'
"""

from __future__ import annotations

from dataclasses import dataclass

ROUNDING_FLOOR = 1e-12
"""Values below this (times the scale of the inputs) are rounding noise."""

BOTH_ROUNDING = "both at rounding level"
DENOMINATOR_ROUNDING = "not meaningful: the denominator is at rounding level"


@dataclass(frozen=True)
class Ratio:
    """a / b when both are meaningful.

    Attributes:
        value: the quotient, 0.0 when only the numerator is at rounding level (it is then below
            floor / b), or None when the quotient means nothing.
        why: None, or the reason in words (:data:`BOTH_ROUNDING`, :data:`DENOMINATOR_ROUNDING`).
    """

    value: float | None
    why: str | None = None

    def shown(self, digits: int = 3, suffix: str = "x") -> str:
        """The ratio for people: '1.21x', or the reason it is not given."""
        return f"{self.value:.{digits}g}{suffix}" if self.value is not None else (self.why or "—")


def at_rounding_level(x: float | None, *, scale: float = 1.0) -> bool:
    """True when |x| is below the rounding floor for numbers of this scale (None counts as no value)."""
    return x is not None and abs(x) < ROUNDING_FLOOR * scale


def safe_ratio(a: float | None, b: float | None, *, scale: float = 1.0) -> Ratio:
    """a / b, or the reason it is no ratio (see the module docstring).

    Args:
        a, b: the numbers (None: unknown; gives Ratio(None, None)).
        scale: the scale of the inputs (1 for infidelities; radians of the knob for angles).
    """
    if a is None or b is None:
        return Ratio(None)
    low_a, low_b = at_rounding_level(a, scale=scale), at_rounding_level(b, scale=scale)
    if low_a and low_b:
        return Ratio(None, BOTH_ROUNDING)
    if low_b:
        return Ratio(None, DENOMINATOR_ROUNDING)
    if low_a:
        return Ratio(0.0)
    return Ratio(a / b)
