"""The flat program a reader produces, before layering.

Readers (OpenQASM, cirq) turn their input into a sequence of *statements*: an
:class:`~budget.circuit.ir.Operation`, a :class:`~budget.circuit.ir.Measure` or
:class:`~budget.circuit.ir.Reset` (one qubit each, grouped later), a :class:`Barrier`, a
:class:`Loop` whose body is again a sequence of statements, or a :class:`Conditional`. :func:`budget.graph.layer_program` then places the operations into layers
(earliest possible, per segment) and turns loops into :class:`~budget.circuit.ir.Repeat` items.

Loops are never unrolled: ``count`` may be 10**9.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Union

import numpy as np

from budget.circuit.ir import Measure, Operation, Reset


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

MAX_LOOP_COUNT = 10**18
"""Most iterations of one loop a reader accepts (the limit of --cycles: counts stay exact ints)."""


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


@dataclass(frozen=True)
class Conditional:
    """Statements run only when classical bits hold a value (``if (c == 5) ...``), else ``orelse``.

    Args:
        bits: classical bit names, least significant first.
        value: the integer the bits must hold.
        then: statements run when they do.
        orelse: statements run otherwise.
        line: source line (1-based), when known.
    """

    bits: tuple[str, ...]
    value: int
    then: tuple["Statement", ...]
    orelse: tuple["Statement", ...] = ()
    line: int | None = None


Statement = Union[Operation, Measure, Reset, Barrier, Loop, Conditional]
"""One entry of a flat program."""


def final_readout(program: list[Statement]) -> tuple[list[Statement], tuple[int, ...]]:
    """Split off the final readout when every measurement comes last on its qubit.

    When the program has no reset, no conditional, no measurement inside a loop and nothing acts
    on a qubit after its measurement, the measurements are the final readout: they are removed
    and their qubits returned (the circuit is then an ordinary gate circuit with a readout).
    Otherwise the program is returned unchanged with no final qubits: its measurements are items.
    """
    measured: list[int] = []
    done: set[int] = set()
    for st in program:
        if isinstance(st, Measure):
            if done.intersection(st.qubits):
                return program, ()
            done.update(st.qubits)
            measured.extend(st.qubits)
        elif isinstance(st, Operation):
            if done.intersection(st.qubits):
                return program, ()
        elif isinstance(st, (Reset, Conditional)) or (isinstance(st, Loop) and _probes_in(st.body, done)):
            return program, ()
    return [st for st in program if not isinstance(st, Measure)], tuple(measured)


def _probes_in(body: tuple[Statement, ...], done: set[int]) -> bool:
    """True when a loop body measures, resets, branches, or touches an already measured qubit."""
    for st in body:
        if isinstance(st, (Measure, Reset, Conditional)):
            return True
        if isinstance(st, Operation) and done.intersection(st.qubits):
            return True
        if isinstance(st, Loop) and _probes_in(st.body, done):
            return True
    return False
