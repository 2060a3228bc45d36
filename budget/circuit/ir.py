"""The structured intermediate form: operations, layers, repeated blocks and measurement items.

A circuit is a sequence of *items*, each of one explicit kind:

- :class:`Layer`: operations that run at the same time, no shared qubit;
- :class:`Repeat`: a body of items run ``count`` times in a row;
- :class:`Measure`: a projective Z measurement of some qubits, each outcome written to a named
  classical bit (mid-circuit or final);
- :class:`Reset`: some qubits put back to |0>;
- :class:`IfBlock`: items run only when named classical bits hold a value (feed-forward).

Repetition is kept, never unrolled: ``count`` may be 10**9. Code that walks items must name every
kind it supports and refuse the others: each class names its kind (``kind``, a
:class:`budget.circuit.walk.Kind`) and walkers go through :mod:`budget.circuit.walk`;
:attr:`StructuredCircuit.has_mid_circuit` tells whether the last three kinds occur at all.

Matrices follow cirq's convention: the first qubit of an operation is the most significant bit.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import ClassVar, Iterator, Union

import numpy as np

from budget.circuit.gates import ideal_unitary
from budget.circuit.walk import Kind, counted, first_mid_circuit, item_kind, kind_of, unrolled, unsupported_item


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
        return ideal_unitary(self.gate, self.params)

    def __hash__(self) -> int:  # matrix is excluded from equality; keep hashing consistent
        return hash((self.gate, self.qubits, self.params))


@dataclass(frozen=True)
class Layer:
    """Operations that run at the same time; no two share a qubit."""

    kind: ClassVar[Kind] = Kind.LAYER

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

    kind: ClassVar[Kind] = Kind.REPEAT

    body: tuple["Item", ...]
    count: int

    def __post_init__(self) -> None:
        if not isinstance(self.count, (int, np.integer)) or isinstance(self.count, bool):
            raise TypeError(f"repeat count must be an integer, got {self.count!r}")
        if self.count < 1:
            raise ValueError(f"repeat count = {self.count}: must be at least 1")


@dataclass(frozen=True)
class Measure:
    """Projective measurement in Z of ``qubits``; the outcome of ``qubits[k]`` is written to the
    classical bit named ``bits[k]`` (``"c[0]"``). The measured qubit keeps the projected state.

    Bit names are plain strings; inside a loop whose variable indexes the bit (``c[i]``) the name
    holds the variable (``"c[i]"``) and means this iteration's bit. Outcomes form the measurement
    record in execution order (within an item, in the order of ``qubits``).
    """

    kind: ClassVar[Kind] = Kind.MEASURE

    qubits: tuple[int, ...]
    bits: tuple[str, ...]
    line: int | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        if len(self.qubits) != len(self.bits):
            raise ValueError(f"measure: {len(self.qubits)} qubits but {len(self.bits)} bits")
        if len(set(self.qubits)) != len(self.qubits):
            raise ValueError(f"measure on qubits {self.qubits}: a qubit appears twice in one item")


@dataclass(frozen=True)
class Reset:
    """Reset of ``qubits`` to |0> (a measurement whose outcome is used to flip the qubit back)."""

    kind: ClassVar[Kind] = Kind.RESET

    qubits: tuple[int, ...]
    line: int | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        if len(set(self.qubits)) != len(self.qubits):
            raise ValueError(f"reset on qubits {self.qubits}: a qubit appears twice in one item")


@dataclass(frozen=True)
class IfBlock:
    """Feed-forward: ``then`` runs when the bits hold ``value``, else ``orelse`` runs.

    The integer read from the bits is Σ_k bit_k 2^k (``bits[0]`` least significant, as OpenQASM
    reads ``c == 5`` for a register c); each bit holds the latest outcome written to it (0 if none).
    """

    kind: ClassVar[Kind] = Kind.IF

    bits: tuple[str, ...]
    value: int
    then: tuple["Item", ...]
    orelse: tuple["Item", ...] = ()
    line: int | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        if not self.bits:
            raise ValueError("if: the condition names no classical bit")
        if not 0 <= self.value < 2 ** len(self.bits):
            raise ValueError(f"if: value {self.value} does not fit in {len(self.bits)} bit(s)")


Item = Union[Layer, Repeat, Measure, Reset, IfBlock]

MID_CIRCUIT_KINDS = (Measure, Reset, IfBlock)
"""Item kinds that only the measurement-aware metrics (detectors, record) support."""


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

    @property
    def has_mid_circuit(self) -> bool:
        """True when a measurement, reset or if block is an item of the circuit (at any depth)."""
        return first_mid_circuit(self.body) is not None

    def mid_circuit_reason(self) -> str | None:
        """None for a gate-only circuit, else a one-line reason naming the first such item."""
        it = first_mid_circuit(self.body)
        if it is None:
            return None
        line = f" (line {it.line})" if it.line else ""
        return (
            f"the circuit has a mid-circuit {item_kind(it)}{line}: use --metric detectors or --metric record"
        )

    def executed_counts(self) -> tuple[int, int]:
        """(operations, layers) actually executed, repetitions included (Python ints, no overflow)."""
        return _counts(self.body)

    def iter_layers(self) -> Iterator[Layer]:
        """Every executed layer in order, repeats unrolled. Only for small circuits and tests."""
        for it in unrolled(self.body, where="iter_layers"):
            if it.kind is not Kind.LAYER:
                raise unsupported_item(it, "iter_layers (gate layers only)")
            yield it

    def unrolled(self) -> "StructuredCircuit":
        """The same circuit with every repeat unrolled (tests and small circuits only)."""
        return StructuredCircuit(self.qubits, tuple(self.iter_layers()), self.measured, self.source)

    def distinct_operations(self) -> list[Operation]:
        """Every operation that appears in the text of the circuit (each once per place)."""
        return [op for layer in self.distinct_layers() for op in layer.operations]

    def distinct_layers(self) -> list[Layer]:
        """Every gate layer as written (once per place in the text, repeats not unrolled, both
        branches of an if block)."""
        return [it for it, _ in counted(self.body, where="distinct_layers") if it.kind is Kind.LAYER]


def _counts(items: tuple[Item, ...]) -> tuple[int, int]:
    """(operations, layers) executed; an if block counts its larger branch (an upper bound)."""
    ops = layers = 0
    for it in items:
        kind = kind_of(it, "executed_counts")
        if kind is Kind.LAYER:
            ops += len(it.operations)
            layers += 1
        elif kind is Kind.REPEAT:
            o, l = _counts(it.body)
            ops += o * it.count
            layers += l * it.count
        elif kind is Kind.IF:
            ops_layers = max(_counts(it.then), _counts(it.orelse))
            ops += ops_layers[0]
            layers += ops_layers[1]
    return ops, layers
