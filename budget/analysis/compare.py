"""Two circuits under one error model, side by side (``budget analyze A --against B``).

The usual question: is my structured circuit worse (or better) than an unstructured circuit of the
same size would be? :func:`random_counterpart` builds such a circuit: the same qubits and the same
number of each gate (with the same angles), in a random order, each single-qubit gate on a random
qubit and each two-qubit gate on one of the qubit pairs that gate already uses (so device
connectivity and per-pair error tables still apply), placed into layers as early as possible.
Coherent errors of a random circuit point in unrelated directions and mostly add in probability,
so its actual infidelity sits near the naive product; a structured circuit departs from it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from budget.analysis.result import BudgetResult
from budget.circuit.ir import Operation, StructuredCircuit
from budget.problems import InputError

MAX_RANDOM_OPERATIONS = 200_000
"""A random counterpart is unrolled: at most this many executed operations."""


def random_counterpart(circuit: StructuredCircuit, *, seed: int) -> StructuredCircuit:
    """A random circuit with the same qubits and the same gate counts (see module docstring).

    Drawn with ``numpy.random.default_rng(seed)``; repeats of ``circuit`` are unrolled first.

    Raises:
        TooLargeError: more than :data:`MAX_RANDOM_OPERATIONS` executed operations.
        InputError: seed < 0.
    """
    from budget.graph import asap_layers, flat_operations

    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise InputError(f"seed = {seed!r}: expected a whole number >= 0")
    ops = flat_operations(circuit, max_operations=MAX_RANDOM_OPERATIONS)
    rng = np.random.default_rng(seed)
    pairs: dict[str, list[tuple[int, ...]]] = {}
    for op in ops:
        if len(op.qubits) == 2 and op.qubits not in pairs.setdefault(op.gate, []):
            pairs[op.gate].append(op.qubits)
    placed: list[Operation] = []
    for i in rng.permutation(len(ops)):
        op = ops[int(i)]
        if len(op.qubits) == 1:
            qubits: tuple[int, ...] = (int(rng.integers(circuit.num_qubits)),)
        else:
            options = pairs[op.gate]
            qubits = options[int(rng.integers(len(options)))]
        placed.append(Operation(op.gate, qubits, op.params, label=op.label, matrix=op.matrix))
    source = f"random counterpart of {circuit.source} (seed {seed})"
    return StructuredCircuit(circuit.qubits, asap_layers(placed), circuit.measured, source)


@dataclass(frozen=True)
class Comparison:
    """Two analyses under the same error model and metric.

    Attributes:
        first: the circuit asked about.
        second: the circuit it is set against.
    """

    first: BudgetResult
    second: BudgetResult

    def __post_init__(self) -> None:
        if self.first.metric != self.second.metric:
            raise ValueError(
                f"comparison: metrics differ ({self.first.metric} vs {self.second.metric}); use one metric"
            )

    def rows(self) -> list[tuple[str, float | int | None, float | int | None]]:
        """(quantity in words, first value, second value), in reading order."""
        a, b = self.first, self.second
        return [
            ("qubits", a.qubits, b.qubits),
            ("operations executed", a.operations, b.operations),
            ("layers executed", a.layers, b.layers),
            ("fidelity product (naive)", a.naive_infidelity, b.naive_infidelity),
            (f"accumulated ({a.engine} / {b.engine})", a.actual_infidelity, b.actual_infidelity),
            ("accumulated ÷ naive", a.coherent_amplification, b.coherent_amplification),
        ] + (
            [("Pauli-twirled variant", a.twirled_infidelity, b.twirled_infidelity)]
            if a.twirled_infidelity is not None or b.twirled_infidelity is not None
            else []
        )

    @property
    def ratio(self) -> float | None:
        """first actual ÷ second actual (None when the second is 0)."""
        if self.second.actual_infidelity <= 0:
            return None
        return self.first.actual_infidelity / self.second.actual_infidelity

    def to_dict(self) -> dict:
        """The second analysis in full plus the ratio, for ``"against"`` in the JSON output."""
        return {"result": self.second.to_dict(), "actual_ratio": self.ratio}
