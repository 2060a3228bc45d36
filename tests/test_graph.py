"""Layering (ASAP per segment, barriers, loops), budget/graph.py, and light cones, budget/errors/light_cone.py."""

from __future__ import annotations

import cirq
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.circuit.program import Barrier, Loop
from budget.errors.light_cone import light_cone_operations, light_cone_qubits
from budget.graph import (
    asap_layers,
    flat_operations,
    layer_program,
    operation_dag,
    qubit_timelines,
)
from budget.problems import TooLargeError

NQ = 5
NAMES = tuple(f"q[{i}]" for i in range(NQ))


def _op(draw_qubits: tuple[int, ...], k: int) -> Operation:
    # params carry a serial number so equal-looking operations stay distinguishable
    if len(draw_qubits) == 1:
        return Operation("rx", draw_qubits, (float(k),))
    return Operation("cp", draw_qubits, (float(k),))


@st.composite
def programs(draw, max_len: int = 30):
    """Random flat programs: one- and two-qubit operations with barriers mixed in."""
    n = draw(st.integers(0, max_len))
    prog = []
    for k in range(n):
        if draw(st.integers(0, 9)) == 0:
            prog.append(Barrier())
            continue
        two = draw(st.booleans())
        qs = tuple(draw(st.lists(st.integers(0, NQ - 1), min_size=1 + two, max_size=1 + two, unique=True)))
        prog.append(_op(qs, k))
    return prog


def _independent_asap(ops: list[Operation]) -> list[int]:
    """Layer index by the recurrence layer(j) = 1 + max(layer of earlier ops on shared qubits)."""
    last: dict[int, int] = {}
    out = []
    for op in ops:
        layer = 1 + max((last.get(q, -1) for q in op.qubits), default=-1)
        for q in op.qubits:
            last[q] = layer
        out.append(layer)
    return out


@settings(max_examples=150, deadline=None)
@given(programs())
def test_layering_preserves_per_qubit_order_and_is_asap(prog):
    circ = layer_program(prog, qubits=NAMES)
    layers = list(circ.iter_layers())
    for layer in layers:  # no shared qubit inside a layer
        qs = [q for op in layer.operations for q in op.qubits]
        assert len(qs) == len(set(qs))
    flat = [op for layer in layers for op in layer.operations]
    ops = [s for s in prog if isinstance(s, Operation)]
    assert sorted(map(id, flat)) == sorted(map(id, ops))  # every operation exactly once
    for q in range(NQ):
        assert [op for op in flat if q in op.qubits] == [op for op in ops if q in op.qubits]
    # ASAP within each barrier-delimited segment, checked against the recurrence
    segments, cur = [], []
    for s in prog:
        if isinstance(s, Barrier):
            segments.append(cur)
            cur = []
        else:
            cur.append(s)
    segments.append(cur)
    pos = 0
    for seg in segments:
        depth = max(_independent_asap(seg), default=-1) + 1
        for op, k in zip(seg, _independent_asap(seg)):
            assert any(o is op for o in layers[pos + k].operations)
        pos += depth
    assert pos == len(layers)


def test_barrier_closes_layer():
    a, b = Operation("x", (0,)), Operation("x", (1,))
    assert len(layer_program([a, b], qubits=NAMES).body) == 1
    circ = layer_program([a, Barrier((0,)), b], qubits=NAMES)
    assert [layer.operations for layer in circ.body] == [(a,), (b,)]


def test_loop_is_segment_boundary_and_kept_folded():
    h0, h1, cz = Operation("h", (0,)), Operation("h", (1,)), Operation("cz", (0, 1))
    prog = [h0, Loop((h1, cz, Loop((h0,), 10**9)), 5), h1]
    circ = layer_program(prog, qubits=NAMES, measured=[1, 0, 1])
    assert circ.measured == (0, 1)
    first, rep, last = circ.body
    assert first == Layer((h0,)) and last == Layer((h1,))
    assert isinstance(rep, Repeat) and rep.count == 5
    assert rep.body[:2] == (Layer((h1,)), Layer((cz,)))
    assert rep.body[2] == Repeat((Layer((h0,)),), 10**9)
    ops, layers = circ.executed_counts()
    assert ops == 2 + 5 * (2 + 10**9) and layers == 2 + 5 * (2 + 10**9)


def test_empty_and_zero_loops_dropped():
    x = Operation("x", (0,))
    circ = layer_program([Loop((x,), 0), Loop((), 7), Loop((Barrier(),), 3), x], qubits=NAMES)
    assert circ.body == (Layer((x,)),)


def test_bad_program_entries():
    with pytest.raises(ValueError, match="outside"):
        layer_program([Operation("x", (7,))], qubits=NAMES)
    with pytest.raises(TypeError, match="Operation, Measure, Reset, Barrier, Loop"):
        layer_program(["x q[0]"], qubits=NAMES)
    with pytest.raises(ValueError, match="at least 0"):
        Loop((), -1)


def test_dag_and_timelines():
    ops = [Operation("h", (0,)), Operation("cz", (0, 1)), Operation("cz", (0, 1)), Operation("x", (2,))]
    assert qubit_timelines(ops) == {0: [0, 1, 2], 1: [1, 2], 2: [3]}
    dag = operation_dag(ops)
    assert set(dag.edges) == {(0, 1), (1, 2)}
    assert dag.edges[1, 2]["qubits"] == (0, 1)
    assert [len(layer.operations) for layer in asap_layers(ops)] == [2, 1, 1]


def _random_ops(rng: np.random.Generator, n_ops: int, nq: int) -> list[Operation]:
    ops = []
    for _ in range(n_ops):
        if rng.random() < 0.5:
            ops.append(Operation("u3", (int(rng.integers(nq)),), tuple(rng.uniform(0, 6, 3))))
        else:
            a, b = rng.choice(nq, 2, replace=False)
            ops.append(Operation("cx", (int(a), int(b))))
    return ops


def _reduced(ops: list[Operation], nq: int, keep: list[int]) -> np.ndarray:
    qs = cirq.LineQubit.range(nq)
    c = cirq.Circuit(cirq.MatrixGate(op.unitary()).on(*(qs[i] for i in op.qubits)) for op in ops)
    c.append(cirq.I.on_each(*qs))
    psi = cirq.final_state_vector(c, qubit_order=qs, dtype=np.complex128)
    return cirq.partial_trace(np.outer(psi, psi.conj()).reshape((2,) * (2 * nq)), keep).reshape(2 ** len(keep), -1)


@pytest.mark.parametrize("seed", range(6))
def test_light_cone_keeps_reduced_state(seed):
    """Dropping operations outside the backward light cone leaves the reduced state unchanged
    (checked with cirq's state-vector simulator, an independent reference)."""
    rng = np.random.default_rng(seed)
    nq = 5
    ops = _random_ops(rng, 14, nq)
    keep = [int(rng.integers(nq))]
    cone = light_cone_operations(ops, keep)
    assert cone == sorted(cone)
    kept = [ops[i] for i in cone]
    np.testing.assert_allclose(_reduced(kept, nq, keep), _reduced(ops, nq, keep), atol=1e-9)


def test_light_cone_simple_chain():
    ops = [Operation("x", (0,)), Operation("cx", (0, 1)), Operation("x", (2,)), Operation("h", (1,))]
    assert light_cone_operations(ops, [1]) == [0, 1, 3]
    assert light_cone_operations(ops, [2]) == [2]
    circ = layer_program(ops, qubits=NAMES)
    flat = flat_operations(circ)
    assert [flat[i] for i in light_cone_operations(circ, [1])] == [ops[0], ops[1], ops[3]]


def test_light_cone_qubits_folded_matches_unrolled():
    # CX(2,3) then CX(1,2) then CX(0,1): walking backwards, the cone of qubit 3 grows by one
    # qubit per repetition after the first, so it needs several passes over the body
    body = (Layer((Operation("cx", (2, 3)),)), Layer((Operation("cx", (1, 2)),)), Layer((Operation("cx", (0, 1)),)))
    for count, expected in [(1, {2, 3}), (2, {1, 2, 3}), (3, {0, 1, 2, 3}), (5, {0, 1, 2, 3})]:
        small = StructuredCircuit(NAMES, (Repeat(body, count),))
        ops = flat_operations(small)
        unrolled = {q for i in light_cone_operations(ops, [3]) for q in ops[i].qubits} | {3}
        assert light_cone_qubits(small, [3]) == frozenset(unrolled) == frozenset(expected)
    huge = StructuredCircuit(NAMES, (Repeat(body, 10**9),))
    assert light_cone_qubits(huge, [3]) == frozenset({0, 1, 2, 3})
    assert light_cone_qubits(huge, [4]) == frozenset({4})
    with pytest.raises(TooLargeError, match="unrolling limit"):
        flat_operations(huge)
