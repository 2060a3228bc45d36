"""The dense paths over every qubit count they serve, every placement of 1- and 2-qubit operators
and batch (group) counts 1-40, against independent references.

The rows product of budget/engines/matrices/apply.py slices a batch into chunks; a row count the chunk
does not divide (odd group counts times a power of two, an operator on the highest qubit) once
crashed with a reshape error. References: numpy's einsum on the (B, 2, ..., 2) tensor (a general
contraction that shares nothing with the reshape/matmul/chunk logic under test), checked itself
against cirq.unitary on small registers; cirq's density-matrix simulator for the engines
(tests/reference.py).
"""

from __future__ import annotations

import itertools
import string

import cirq
import numpy as np
import pytest

from budget.engines.matrices.apply import LocalOp, apply, as_rows, conjugate, embed, fuse
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.circuit.qasm import parse_qasm
from tests.reference import cirq_infidelity

RNG_SEED = 20261202
BATCHES_ALL = tuple(range(1, 41))
BATCHES_FEW = (1, 2, 3, 5, 7, 13, 40)


def _random_unitary(rng: np.random.Generator, k: int) -> np.ndarray:
    return cirq.testing.random_unitary(2**k, random_state=np.random.RandomState(int(rng.integers(2**31))))


def _random_batch(rng: np.random.Generator, b: int, dim: int) -> np.ndarray:
    return rng.normal(size=(b, dim)) + 1j * rng.normal(size=(b, dim))


def _einsum_apply(batch: np.ndarray, m: np.ndarray, qubits: tuple[int, ...], n: int) -> np.ndarray:
    """Reference: contract the matrix (gate order, first qubit most significant) into the tensor."""
    k = len(qubits)
    t = batch.reshape((batch.shape[0],) + (2,) * n)
    letters = string.ascii_letters
    state = [letters[i] for i in range(n)]
    new = [letters[n + i] for i in range(k)]
    out = list(state)
    for i, q in enumerate(qubits):
        out[q] = new[i]
    spec = f"{''.join(new)}{''.join(state[q] for q in qubits)},Z{''.join(state)}->Z{''.join(out)}"
    return np.einsum(spec, m.reshape((2,) * (2 * k)), t).reshape(batch.shape)


def _placements(n: int) -> list[tuple[int, ...]]:
    """Every qubit, and every ordered pair (adjacent, non-adjacent, reversed; first, last, middle)
    on small registers; on larger ones the pairs that reach the ends and the middle."""
    ones = [(q,) for q in range(n)]
    if n < 2:
        return ones
    if n <= 6:
        return ones + list(itertools.permutations(range(n), 2))
    m = n // 2
    pairs = {(0, 1), (1, 0), (n - 2, n - 1), (n - 1, n - 2), (0, n - 1), (n - 1, 0), (m, m + 2), (m + 2, m), (m - 1, n - 1)}
    return ones + sorted(pairs)


def test_einsum_reference_agrees_with_cirq():
    # the reference itself, against cirq's unitary of a gate placed on chosen line qubits
    rng = np.random.default_rng(RNG_SEED)
    n = 4
    for qubits in _placements(n):
        m = _random_unitary(rng, len(qubits))
        qs = cirq.LineQubit.range(n)
        full = cirq.Circuit(cirq.MatrixGate(m).on(*[qs[q] for q in qubits])).unitary(qubit_order=qs)
        batch = _random_batch(rng, 3, 2**n)
        np.testing.assert_allclose(_einsum_apply(batch, m, qubits, n), batch @ full.T, atol=1e-12)


@pytest.mark.parametrize("n", range(1, 14))
def test_apply_every_placement_and_batch(n):
    rng = np.random.default_rng(RNG_SEED + n)
    batches = BATCHES_ALL if n <= 7 else BATCHES_FEW
    for qubits in _placements(n):
        k = len(qubits)
        dense = _random_unitary(rng, k)
        diagonal = np.diag(np.exp(1j * rng.uniform(0, 2 * np.pi, 2**k)))
        for m in (dense, diagonal):
            op = LocalOp.of(m, qubits)
            for b in batches if m is dense else BATCHES_FEW:
                batch = _random_batch(rng, b, 2**n)
                np.testing.assert_allclose(apply(batch, op, n), _einsum_apply(batch, m, qubits, n), atol=1e-10)


@pytest.mark.parametrize("n", range(1, 7))
def test_conjugate_every_placement_and_group_count(n):
    # U M U† for G stacked d x d matrices (the generators engine's groups), against cirq's unitary
    rng = np.random.default_rng(RNG_SEED + 100 + n)
    qs = cirq.LineQubit.range(n)
    groups = BATCHES_ALL if n <= 4 else BATCHES_FEW + (9, 11, 21, 33)
    d = 2**n
    for qubits in _placements(n):
        m = _random_unitary(rng, len(qubits))
        full = cirq.Circuit(cirq.MatrixGate(m).on(*[qs[q] for q in qubits])).unitary(qubit_order=qs)
        op = LocalOp.of(m, qubits)
        for g in groups:
            stack = _random_batch(rng, g, d * d).reshape(g, d, d)
            np.testing.assert_allclose(conjugate(stack, op, n), full @ stack @ full.conj().T, atol=1e-10)


@pytest.mark.parametrize("n", range(1, 9))
def test_fuse_equals_the_layer_product_and_sum(n):
    # a layer of disjoint random 1- and 2-qubit operators (some straddling fuse windows)
    rng = np.random.default_rng(RNG_SEED + 200 + n)
    qs = cirq.LineQubit.range(n)
    order = list(rng.permutation(n))
    ops = []
    while order:
        k = 2 if len(order) >= 2 and rng.random() < 0.6 else 1
        where = tuple(int(order.pop()) for _ in range(k))
        ops.append((_random_unitary(rng, k), where))
    layer = cirq.Circuit(cirq.Moment(cirq.MatrixGate(m).on(*[qs[q] for q in w]) for m, w in ops))
    full = layer.unitary(qubit_order=qs)
    product = np.eye(2**n, dtype=complex)
    for op in fuse(ops, n, product=True):
        product = embed(op.matrix, op.qubits, n) @ product
    np.testing.assert_allclose(product, full, atol=1e-10)
    hermitian = [((m + m.conj().T) / 2, w) for m, w in ops]
    total = sum(embed(op.matrix, op.qubits, n) for op in fuse(hermitian, n, product=False))
    expected = sum(_embedded_by_cirq(h, w, n) for h, w in hermitian)
    np.testing.assert_allclose(total, expected, atol=1e-10)


def _embedded_by_cirq(h: np.ndarray, where: tuple[int, ...], n: int) -> np.ndarray:
    """A Hermitian local operator embedded on n qubits, through cirq's Pauli-string algebra
    (h expanded in Paulis, each PauliString's matrix on the full register)."""
    qs = cirq.LineQubit.range(n)
    k = len(where)
    out = np.zeros((2**n, 2**n), dtype=complex)
    paulis = {"I": cirq.I, "X": cirq.X, "Y": cirq.Y, "Z": cirq.Z}
    for label in itertools.product("IXYZ", repeat=k):
        p = np.ones((1, 1), dtype=complex)
        for ch in label:
            p = np.kron(p, cirq.unitary(paulis[ch]))
        c = np.trace(p.conj().T @ h) / 2**k
        if abs(c) < 1e-15:
            continue
        ps = cirq.PauliString({qs[q]: paulis[ch] for q, ch in zip(where, label) if ch != "I"}, coefficient=c)
        out += ps.matrix(qs)
    return out


def test_as_rows_keeps_zero_rows():
    # reshape(0, -1) cannot infer a row length; as_rows must give (0, m)
    assert as_rows(np.zeros((0, 4, 4))).shape == (0, 16)
    assert as_rows(np.zeros((3, 2, 2))).shape == (3, 4)


# -- engines on the circuits, against cirq's density-matrix simulator --------------------

MINIMAL = "OPENQASM 2.0; include \"qelib1.inc\"; qreg q[6]; sx q[0]; x q[1]; cx q[2],q[3]; cx q[0],q[5];"
MINIMAL_MODEL = {"gates": {"sx": {"overrotation": 0.01}, "x": {"overrotation": 0.02}, "cx": {"cphase": 0.03}}}


@pytest.mark.parametrize("metric", ["process", "state"])
@pytest.mark.parametrize("engine", ["exact", "generators"])
@pytest.mark.parametrize("family_by", ["gate", "pair"])
def test_minimal_six_qubit_case_matches_cirq(engine, metric, family_by):
    from budget.engines import get_engine

    noisy = attach(parse_qasm(MINIMAL), ErrorModel.from_dict(MINIMAL_MODEL), family_by=family_by)
    value = get_engine(engine).run(noisy, metric).infidelity
    reference = cirq_infidelity(noisy, metric)
    # generators is first order: agreement to the size of the next order (~ e²), here < 1e-6
    assert value == pytest.approx(reference, rel=1e-9 if engine == "exact" else 1e-3, abs=1e-12)


def _chain_loop(n: int, rotations: int) -> str:
    """An OpenQASM 3 loop (h, cz, rx on a chain) with ``rotations`` rx gates spread over the
    qubits; by pair, the dense block then holds n + (n - 1) + min(rotations, n) groups."""
    body = " ".join(f"h q[{i}];" for i in range(n))
    body += " " + " ".join(f"cz q[{i}], q[{i + 1}];" for i in range(0, n - 1, 2))
    body += " " + " ".join(f"cz q[{i}], q[{i + 1}];" for i in range(1, n - 1, 2))
    body += " " + " ".join(f"rx({0.1 + 0.01 * k}) q[{(n - 1 - k) % n}];" for k in range(rotations))
    return f'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[{n}] q;\nfor int i in [0:2] {{ {body} }}\n'


@pytest.mark.parametrize("n, rotations", [(2, 1), (3, 3), (5, 5), (6, 7), (6, 1), (4, 13)])
def test_generators_dense_block_over_group_counts(n, rotations):
    # by pair: one group per (gate, qubits), so odd and large group counts reach the dense block
    from budget.engines import get_engine

    model = ErrorModel.from_dict({"gates": {"h": {"overrotation": 0.004}, "cz": {"cphase": 0.01},
                                       "rx": {"overrotation": 0.003}}})
    noisy = attach(parse_qasm(_chain_loop(n, rotations)), model, family_by="pair")
    for metric in ("process", "state"):
        value = get_engine("generators").run(noisy, metric).infidelity
        # cirq's Choi-state simulation of the process metric takes minutes from 5 qubits on; there
        # the exact engine (checked against cirq in tests/test_exact.py) stands in for it
        small = metric == "state" or n <= 4
        reference = cirq_infidelity(noisy, metric) if small else get_engine("exact").run(noisy, metric).infidelity
        assert value == pytest.approx(reference, rel=2e-2)
        qf = get_engine("generators").quadratic_form(noisy, metric)
        assert qf.matrix.shape == (len(qf.labels), len(qf.labels))
