"""Two circuits under one error model, side by side (``budget analyze A --against B``).

The usual question: is my structured circuit worse (or better) than an unstructured circuit of the
same size would be? :func:`random_counterpart` builds such a circuit with the *same layer
structure*: the executed layers of the circuit (repeats unrolled) in a random order, and inside each
layer the gates shuffled among the layer's sites of their size (one-qubit gates among the layer's
one-qubit sites, two-qubit gates among its two-qubit sites). Every layer keeps its busy qubits and
its duration, so idle relaxation is the same as in the circuit and the naive product is unchanged
under a uniform error model: only the order, where coherent errors can build up or echo away, is
random. Coherent errors of a random circuit point in unrelated directions and mostly add in
probability, so its actual infidelity sits near the naive product; a structured circuit departs
from it. One draw is one sample: :func:`budget.analysis.compose.against_random` compares with an
ensemble of draws and its spread.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from budget.analysis.ratios import Ratio, safe_ratio
from budget.analysis.result import BudgetResult
from budget.circuit.ir import Layer, Operation, StructuredCircuit
from budget.problems import InputError, TooLargeError

MAX_RANDOM_OPERATIONS = 200_000
"""A random counterpart is unrolled: at most this many executed operations."""


def _shuffled_layer(layer: Layer, rng: np.random.Generator) -> Layer:
    """The layer's gates permuted among its sites of the same size (sites and durations kept)."""
    by_size: dict[int, list[Operation]] = {}
    for op in layer.operations:
        by_size.setdefault(len(op.qubits), []).append(op)
    placed: list[Operation] = []
    for ops in by_size.values():
        order = rng.permutation(len(ops))
        for site, i in zip(ops, order):
            gate = ops[int(i)]
            placed.append(Operation(gate.gate, site.qubits, gate.params, label=gate.label, matrix=gate.matrix))
    return Layer(tuple(placed))


def random_counterpart(circuit: StructuredCircuit, *, seed: int) -> StructuredCircuit:
    """A random circuit with the same layers, gates and busy qubits (see module docstring).

    Drawn with ``numpy.random.default_rng(seed)``; repeats of ``circuit`` are unrolled first.

    Raises:
        TooLargeError: more than :data:`MAX_RANDOM_OPERATIONS` executed operations.
        InputError: seed < 0.
    """
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise InputError(f"seed = {seed!r}: expected a whole number >= 0")
    total, _ = circuit.executed_counts()
    if total > MAX_RANDOM_OPERATIONS:
        raise TooLargeError(
            f"{circuit.source}: a random counterpart is unrolled; {total:,} executed operations exceed the "
            f"limit of {MAX_RANDOM_OPERATIONS:,} (use fewer cycles)"
        )
    rng = np.random.default_rng(seed)
    layers = [_shuffled_layer(layer, rng) for layer in circuit.iter_layers()]
    order = rng.permutation(len(layers))
    source = f"random counterpart of {circuit.source} (seed {seed})"
    return StructuredCircuit(circuit.qubits, tuple(layers[int(i)] for i in order), circuit.measured, source)


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

    def rows(self) -> list[tuple[str, float | int | str | None, float | int | str | None]]:
        """(quantity in words, first value, second value), in reading order."""
        a, b = self.first, self.second
        return [
            ("qubits", a.qubits, b.qubits),
            ("operations executed", a.operations, b.operations),
            ("layers executed", a.layers, b.layers),
            ("fidelity product (naive)", a.naive_infidelity, b.naive_infidelity),
            (f"actual ({a.engine} / {b.engine})", _or_beyond(a), _or_beyond(b)),
            ("actual ÷ naive", a.verdict.amplification.shown(), b.verdict.amplification.shown()),
        ] + (
            [("Pauli-twirled", a.twirled_infidelity, b.twirled_infidelity)]
            if a.twirled_infidelity is not None or b.twirled_infidelity is not None
            else []
        )

    @property
    def actual_ratio(self) -> Ratio:
        """first actual ÷ second actual (no ratio from values at rounding level or beyond range)."""
        return safe_ratio(self.first.actual, self.second.actual)

    @property
    def ratio(self) -> float | None:
        return self.actual_ratio.value

    def to_dict(self) -> dict:
        """The second analysis in full plus the ratio, for ``"against"`` in the JSON output."""
        r = self.actual_ratio
        return {"result": self.second.to_dict(), "actual_ratio": r.value, "ratio_note": r.why}


def _or_beyond(r: BudgetResult) -> float | str:
    return "beyond range" if r.actual is None else r.actual
