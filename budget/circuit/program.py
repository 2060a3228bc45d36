"""The flat program a reader produces, before layering.

Readers (OpenQASM, cirq) turn their input into a sequence of *statements*: an
:class:`~budget.circuit.ir.Operation`, a :class:`Barrier`, or a :class:`Loop` whose body is again a
sequence of statements. :func:`budget.graph.layer_program` then places the operations into layers
(earliest possible, per segment) and turns loops into :class:`~budget.circuit.ir.Repeat` items.

Loops are never unrolled: ``count`` may be 10**9.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Union

import numpy as np

from budget.circuit.ir import Operation


@dataclass(frozen=True)
class Barrier:
    """Closes the current layer: no operation after it shares a layer with one before it.

    Args:
        qubits: the qubits the source named (informational; every barrier closes the layer for
            all qubits).
        line: source line (1-based), when known.
    """

    qubits: tuple[int, ...] = ()
    line: int | None = None


@dataclass(frozen=True)
class Loop:
    """A body of statements run ``count`` times in a row (count >= 0; 0 means the body never runs).

    Args:
        body: the statements of one iteration.
        count: number of iterations, a Python int (no overflow).
        line: source line (1-based) of the loop header, when known.
    """

    body: tuple["Statement", ...]
    count: int
    line: int | None = None

    def __post_init__(self) -> None:
        if not isinstance(self.count, (int, np.integer)) or isinstance(self.count, bool):
            raise TypeError(f"loop count must be an integer, got {self.count!r}")
        if self.count < 0:
            raise ValueError(f"loop count = {self.count}: must be at least 0")


Statement = Union[Operation, Barrier, Loop]
"""One entry of a flat program."""
