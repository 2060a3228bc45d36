"""The structured intermediate form: operations, layers and repeated blocks.

A circuit is a sequence of *items*; an item is either a :class:`Layer` (operations that run at the
same time, no shared qubit) or a :class:`Repeat` (a body of items run ``count`` times in a row).
Repetition is kept, never unrolled: ``count`` may be 10**9.

Matrices follow cirq's convention: the first qubit of an operation is the most significant bit.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterator, Union

import numpy as np


@dataclass(frozen=True)
class Operation:
    """One gate on one or two qubits.

    Args:
        gate: canonical lower-case gate name from :mod:`budget.circuit.gates` (``"cz"``, ``"rx"``),
            or ``"unitary"`` for a gate known only by its matrix (``matrix`` then holds it).
        qubits: qubit indices into :attr:`StructuredCircuit.qubits`, in gate order.
        params: gate angles in radians, in the order OpenQASM gives them.
        line: source line (1-based) the operation came from, when known.
        label: display name for fallback gates (e.g. the cirq gate's repr).
        matrix: the ideal unitary, only for ``gate == "unitary"``.
    """

    gate: str
    qubits: tuple[int, ...]
    params: tuple[float, ...] = ()
    line: int | None = field(default=None, compare=False)
    label: str | None = field(default=None, compare=False)
    matrix: np.ndarray | None = field(default=None, compare=False, repr=False)

    def __post_init__(self) -> None:
        if len(set(self.qubits)) != len(self.qubits):
            raise ValueError(f"operation {self.gate} on qubits {self.qubits}: a qubit appears twice")
        if not 1 <= len(self.qubits) <= 2:
            raise ValueError(
                f"operation {self.gate} on {len(self.qubits)} qubits: only one- and two-qubit "
                "operations are allowed (decompose larger gates first)"
            )

    def unitary(self) -> np.ndarray:
        """The ideal unitary in gate order (first qubit most significant)."""
        if self.matrix is not None:
            return self.matrix
        from budget.circuit.gates import ideal_unitary

        return ideal_unitary(self.gate, self.params)

    def __hash__(self) -> int:  # matrix is excluded from equality; keep hashing consistent
        return hash((self.gate, self.qubits, self.params))


@dataclass(frozen=True)
class Layer:
    """Operations that run at the same time; no two share a qubit."""

    operations: tuple[Operation, ...]

    def __post_init__(self) -> None:
        seen: set[int] = set()
        for op in self.operations:
            clash = seen.intersection(op.qubits)
            if clash:
                raise ValueError(f"layer has two operations on qubit {sorted(clash)[0]}")
            seen.update(op.qubits)


@dataclass(frozen=True)
class Repeat:
    """A block of items run ``count`` times in a row (count >= 1)."""

    body: tuple["Item", ...]
    count: int

    def __post_init__(self) -> None:
        if not isinstance(self.count, (int, np.integer)) or isinstance(self.count, bool):
            raise TypeError(f"repeat count must be an integer, got {self.count!r}")
        if self.count < 1:
            raise ValueError(f"repeat count = {self.count}: must be at least 1")


Item = Union[Layer, Repeat]


@dataclass(frozen=True)
class StructuredCircuit:
    """A circuit with its repetition structure kept.

    Args:
        qubits: display names of the qubits, index = position (``"q[0]"``, ``"anc[2]"``).
        body: the items in time order.
        measured: indices of qubits measured at the end (final readout).
        source: where the circuit came from (a path or ``"<cirq.Circuit>"``), for messages.
    """

    qubits: tuple[str, ...]
    body: tuple[Item, ...]
    measured: tuple[int, ...] = ()
    source: str = "<memory>"

    @property
    def num_qubits(self) -> int:
        return len(self.qubits)

    def with_cycles(self, cycles: int) -> "StructuredCircuit":
        """The whole circuit repeated ``cycles`` times (kept as one :class:`Repeat`)."""
        if cycles == 1:
            return self
        return StructuredCircuit(self.qubits, (Repeat(self.body, int(cycles)),), self.measured, self.source)

    def executed_counts(self) -> tuple[int, int]:
        """(operations, layers) actually executed, repetitions included (Python ints, no overflow)."""
        return _counts(self.body)

    def iter_layers(self) -> Iterator[Layer]:
        """Every executed layer in order, repeats unrolled. Only for small circuits and tests."""
        yield from _iter(self.body)

    def unrolled(self) -> "StructuredCircuit":
        """The same circuit with every repeat unrolled (tests and small circuits only)."""
        return StructuredCircuit(self.qubits, tuple(self.iter_layers()), self.measured, self.source)

    def distinct_operations(self) -> list[Operation]:
        """Every operation that appears in the text of the circuit (each once per place)."""
        out: list[Operation] = []

        def walk(items: tuple[Item, ...]) -> None:
            for it in items:
                if isinstance(it, Layer):
                    out.extend(it.operations)
                else:
                    walk(it.body)

        walk(self.body)
        return out


def _counts(items: tuple[Item, ...]) -> tuple[int, int]:
    ops = layers = 0
    for it in items:
        if isinstance(it, Layer):
            ops += len(it.operations)
            layers += 1
        else:
            o, l = _counts(it.body)
            ops += o * it.count
            layers += l * it.count
    return ops, layers


def _iter(items: tuple[Item, ...]) -> Iterator[Layer]:
    for it in items:
        if isinstance(it, Layer):
            yield it
        else:
            for _ in range(it.count):
                yield from _iter(it.body)
