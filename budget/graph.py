"""Operation graphs: per-qubit timelines, earliest-possible layering (light cones:
:mod:`budget.errors.light_cone`).

A flat list of operations defines a directed acyclic graph (DAG): an edge i -> j joins operation
i to the next operation j that acts on one of its qubits. Placing every operation in the earliest
layer its predecessors allow (as soon as possible, ASAP) puts operation j in layer
1 + max(layer of its predecessors); these are the topological generations of the DAG
(networkx ``topological_generations``).

:func:`layer_program` turns a reader's flat program (operations, barriers, loops; see
:mod:`budget.circuit.program`) into a :class:`~budget.circuit.ir.StructuredCircuit`: barriers and
loop boundaries split the program into segments, each segment is layered ASAP on its own, and
each loop becomes a :class:`~budget.circuit.ir.Repeat` whose body is layered on its own.
Measurements and resets also close the current layer; a run of them with no gate in between is
grouped as early as possible by kind (``measure a; reset a; measure b; reset b`` becomes one
measurement of a and b, then one reset of a and b), keeping each qubit's order.
"""

from __future__ import annotations

from typing import Iterable, Sequence

import networkx as nx

from budget.circuit.ir import IfBlock, Item, Layer, Measure, Operation, Repeat, Reset, StructuredCircuit
from budget.circuit.program import Barrier, Conditional, Loop, Statement
from budget.problems import TooLargeError


def qubit_timelines(ops: Sequence[Operation]) -> dict[int, list[int]]:
    """For each qubit, the indices (into ``ops``) of the operations acting on it, in order."""
    lines: dict[int, list[int]] = {}
    for i, op in enumerate(ops):
        for q in op.qubits:
            lines.setdefault(q, []).append(i)
    return lines


def operation_dag(ops: Sequence[Operation]) -> nx.DiGraph:
    """The dependency DAG of a flat operation list.

    Nodes are the indices 0..len(ops)-1 with attribute ``op``; an edge i -> j (attribute
    ``qubits``: the shared qubits) joins each operation to the next one on each of its qubits.
    """
    dag = nx.DiGraph()
    dag.add_nodes_from((i, {"op": op}) for i, op in enumerate(ops))
    for q, line in qubit_timelines(ops).items():
        for i, j in zip(line, line[1:]):
            if dag.has_edge(i, j):
                dag.edges[i, j]["qubits"] += (q,)
            else:
                dag.add_edge(i, j, qubits=(q,))
    return dag


def asap_layers(ops: Sequence[Operation]) -> tuple[Layer, ...]:
    """Place each operation in the earliest layer after all earlier operations on its qubits.

    Within a layer operations keep their input order. No two operations in a layer share a qubit,
    and every qubit sees its operations in input order.

    >>> from budget.circuit.ir import Operation
    >>> [len(l.operations) for l in asap_layers([Operation("h", (0,)), Operation("h", (1,)),
    ...                                          Operation("cz", (0, 1))])]
    [2, 1]
    """
    if not ops:
        return ()
    dag = operation_dag(ops)
    return tuple(Layer(tuple(ops[i] for i in sorted(gen))) for gen in nx.topological_generations(dag))


def layer_program(
    program: Sequence[Statement],
    *,
    qubits: Sequence[str],
    measured: Iterable[int] = (),
    source: str = "<memory>",
) -> StructuredCircuit:
    """The structured circuit of a flat program: ASAP layers per segment, loops kept as repeats.

    Args:
        program: operations, barriers and loops in time order.
        qubits: display name of every qubit (index = position).
        measured: qubits read out at the end.
        source: where the program came from (a path), kept for messages.

    A barrier closes the current layer for every qubit (also when it names only some qubits); a
    loop is a segment boundary, its body is layered on its own and becomes a ``Repeat``. Loops
    that never run (count 0) or have no operations are dropped.
    """
    n = len(qubits)
    body = _structure(program, n)
    meas = tuple(sorted(set(int(q) for q in measured)))
    for q in meas:
        if not 0 <= q < n:
            raise ValueError(f"measured qubit index {q} is outside 0..{n - 1}")
    return StructuredCircuit(tuple(qubits), body, meas, source)


def _structure(program: Sequence[Statement], n: int) -> tuple[Item, ...]:
    items: list[Item] = []
    segment: list[Operation] = []
    probes: list[Measure | Reset] = []
    for st in program:
        if isinstance(st, (Operation, Measure, Reset)) and any(not 0 <= q < n for q in st.qubits):
            raise ValueError(f"{type(st).__name__.lower()} on qubits {st.qubits}: index outside 0..{n - 1}")
        if isinstance(st, (Measure, Reset)):
            items.extend(asap_layers(segment))
            segment = []
            probes.append(st)
            continue
        items.extend(group_probes(probes))
        probes = []
        if isinstance(st, Operation):
            segment.append(st)
            continue
        items.extend(asap_layers(segment))
        segment = []
        if isinstance(st, Loop):
            inner = _structure(st.body, n)
            if inner and st.count > 0:
                items.append(Repeat(inner, int(st.count)))
        elif isinstance(st, Conditional):
            then, orelse = _structure(st.then, n), _structure(st.orelse, n)
            if then or orelse:
                items.append(IfBlock(st.bits, st.value, then, orelse, st.line))
        elif not isinstance(st, Barrier):
            raise TypeError(f"program statement {type(st).__name__} is not one of Operation, Measure, Reset, "
                            "Barrier, Loop, Conditional")
    items.extend(group_probes(probes))
    items.extend(asap_layers(segment))
    return tuple(items)


def group_probes(probes: Sequence[Measure | Reset]) -> list[Measure | Reset]:
    """Group a run of measurements and resets (no gate between them) into as few items as possible.

    Each one joins the earliest item of its kind that comes after the last item touching its
    qubits; measurements keep their program order within the record (an item whose place would
    put a measurement before an earlier one starts a new item instead).

    >>> [type(g).__name__ for g in group_probes([Measure((0,), ("c[0]",)), Reset((0,)),
    ...                                           Measure((1,), ("c[1]",)), Reset((1,))])]
    ['Measure', 'Reset']
    """
    groups: list[list] = []  # [kind, qubits, bits, line]
    last_measure = -1
    for st in probes:
        kind = type(st)
        touch = max((i for i, g in enumerate(groups) if set(g[1]) & set(st.qubits)), default=-1)
        start = touch + 1
        if kind is Measure:
            start = max(start, last_measure)
        target = next((i for i in range(start, len(groups)) if groups[i][0] is kind), None)
        if target is None:
            groups.append([kind, [], [], st.line])
            target = len(groups) - 1
        groups[target][1].extend(st.qubits)
        if kind is Measure:
            groups[target][2].extend(st.bits)
            last_measure = target
    return [Measure(tuple(q), tuple(b), line) if k is Measure else Reset(tuple(q), line) for k, q, b, line in groups]


def flat_operations(circuit: StructuredCircuit, *, max_operations: int = 1_000_000) -> list[Operation]:
    """Every executed operation in time order, repeats unrolled (small circuits only).

    Raises:
        TooLargeError: more than ``max_operations`` operations would be executed.
    """
    total, _ = circuit.executed_counts()
    if total > max_operations:
        raise TooLargeError(
            f"{circuit.source}: {total} executed operations exceed the unrolling limit of "
            f"{max_operations}; use a method that keeps repeated blocks folded"
        )
    return [op for layer in circuit.iter_layers() for op in layer.operations]
