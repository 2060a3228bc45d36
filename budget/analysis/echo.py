"""Echo suggestions: an x pulse pair on a qubit while it waits, where the pair cancels an error that
builds up (``budget compensate --echoes``).

A qubit that no gate touches in layers a … b of a repeated block can take x in layer a and x again
in layer b: X·X = I and nothing acts on the qubit in between, so the ideal circuit is unchanged,
while every error on that qubit between the two pulses that anticommutes with X (Z phases, the Z
part of a spectator ZZ coupling) changes sign and cancels against the part outside the pair
(the spin echo: Hahn, Phys. Rev. 80, 580 (1950); dynamical decoupling: Viola, Knill, Lloyd,
PRL 82, 2417 (1999)). The pulses bring their own errors and time; each candidate is therefore
run with the chosen engine on the model as given, and the best pair per block and qubit is kept
when it lowers the infidelity.
"""

from __future__ import annotations

from dataclasses import dataclass

from budget.analysis.compensate import correction_points, map_blocks
from budget.circuit.walk import Kind, kind_of
from budget.engines.door import choose_engine
from budget.circuit.ir import Layer, Operation, StructuredCircuit
from budget.errors.attach import attach

MAX_PAIRS = 24  # candidate pairs per idle stretch (spread evenly when there are more)


@dataclass(frozen=True)
class Echo:
    """x on ``qubit`` in layers ``layers`` (1-based, top-level layers of the block's body) of block
    ``block``; ``lines`` are source lines of each layer's first operation; infidelity with the pair."""

    qubit: str
    block: int
    where: str
    layers: tuple[int, int]
    lines: tuple[int | None, int | None]
    infidelity: float


def _infidelity(circuit: StructuredCircuit, model, metric: str, engine: str) -> float:
    noisy = attach(circuit, model)
    return float(choose_engine(noisy, metric, engine).run(noisy, metric).infidelity)


def _idle_stretches(body: tuple, qubit: int) -> list[list[int]]:
    """Runs of consecutive top-level layers of ``body`` (indices) in which no gate touches ``qubit``."""
    runs: list[list[int]] = [[]]
    for i, it in enumerate(body):
        if kind_of(it, "echo") is Kind.LAYER and all(qubit not in op.qubits for op in it.operations):
            runs[-1].append(i)
        elif runs[-1]:
            runs.append([])
    return [r for r in runs if len(r) >= 2]


def with_echo(circuit: StructuredCircuit, block: int, qubit: int, pair: tuple[int, int]) -> StructuredCircuit:
    """The circuit with x on ``qubit`` added to body layers ``pair`` of block ``block``."""
    def add(k: int, body: tuple) -> tuple:
        if k != block:
            return body
        return tuple(Layer(it.operations + (Operation("x", (qubit,)),)) if i in pair else it
                     for i, it in enumerate(body))

    return StructuredCircuit(circuit.qubits, map_blocks(circuit.body, add), circuit.measured, circuit.source)


def echo_suggestions(circuit: StructuredCircuit, model, *, metric: str = "process", engine: str = "auto",
                     before: float | None = None) -> tuple[Echo, ...]:
    """The best x-pair echo per repeated block and waiting qubit that lowers the infidelity."""
    before = _infidelity(circuit, model, metric, engine) if before is None else before
    bodies: dict[int, tuple] = {}
    map_blocks(circuit.body, lambda k, body: bodies.setdefault(k, body))
    out = []
    for point in correction_points(circuit, "blocks"):
        if point.block is None:
            continue
        body = bodies[point.block]
        for q in range(circuit.num_qubits):
            best: tuple[float, tuple[int, int]] | None = None
            for run in _idle_stretches(body, q):
                pairs = [(a, b) for i, a in enumerate(run) for b in run[i + 1:]]
                step = max(1, len(pairs) // MAX_PAIRS)
                for pair in pairs[::step]:
                    value = _infidelity(with_echo(circuit, point.block, q, pair), model, metric, engine)
                    if value < before * (1 - 1e-3) and (best is None or value < best[0]):
                        best = (value, pair)
            if best is not None:
                lines = tuple(next((op.line for op in body[i].operations if op.line is not None), None) for i in best[1])
                out.append(Echo(circuit.qubits[q], point.block, point.where, (best[1][0] + 1, best[1][1] + 1),
                                lines, best[0]))
    return tuple(sorted(out, key=lambda e: e.infidelity))
