"""The pauli engine's per-qubit map (where the error lands at the output) against references
outside it.

- Coherent part: the generators engine's summed Hamiltonian at the output (dense matrices, repeats
  in its periodic closed form, a different code path) expanded in Paulis with numpy: m_q gets A_Q²
  for every Pauli Q touching q.
- Stochastic part: each executed stochastic Pauli P (relaxation through its Pauli twirl) carried to
  the output with cirq's unitary of the ideal rest of the circuit, L = R P R†, expanded the same
  way: m_q gets p |l_Q|² (first-order χ-matrix weight of the reduced channel on q; docs/methods.md).
- Clifford circuits: the clifford engine's map (the same quantity; its sink sums in float32, hence
  1e-6 there).
"""

from __future__ import annotations

import functools
import itertools

import cirq
import numpy as np
import pytest

from budget.circuit.walk import unrolled
from budget.engines.clifford.engine import CliffordEngine
from budget.engines.generators.dense import DensePropagator
from budget.engines.matrices.channels import by_family, content_cache
from budget.engines.pauli import PauliEngine
from budget.errors.noisy import NoisyCircuit
from budget.errors.normal_form import layer_errors, stochastic_rates
from clifford_reference import random_clifford_circuit
from pauli_cases import ising
from reference import pauli_matrix, random_noisy_circuit

EXACT = PauliEngine(truncate=0.0, second_order=False)


@functools.lru_cache(maxsize=8)
def _paulis(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Every n-qubit Pauli matrix, flattened and transposed for Tr(Q op), and its support."""
    labels = ["".join(p) for p in itertools.product("IXYZ", repeat=n)]
    mats = np.array([pauli_matrix(label).T.reshape(-1) for label in labels])
    return mats, np.array([[ch != "I" for ch in label] for label in labels], float)


def _weights(op: np.ndarray, n: int) -> np.ndarray:
    """Σ_Q |c_Q|² [q ∈ supp Q] per qubit for op = Σ_Q c_Q Q (qubit 0 most significant)."""
    mats, support = _paulis(n)
    c = mats @ op.reshape(-1) / 2**n
    return (np.abs(c) ** 2) @ support


def _reference(c: NoisyCircuit) -> np.ndarray:
    n = c.num_qubits
    qs = cirq.LineQubit.range(n)
    h = DensePropagator(n, content_cache(n, by_family)).block(c.body).total()
    out = _weights(h, n)
    layers = list(unrolled(c.body))
    after = [np.eye(2**n, dtype=complex)]  # after[i]: ideal unitary of the layers after layer i (reversed build)
    for layer in reversed(layers):
        ops = [cirq.MatrixGate(nop.op.unitary()).on(*[qs[q] for q in nop.qubits]) for nop in layer.operations]
        lay = cirq.unitary(cirq.Circuit([cirq.I.on_each(*qs), *ops])) if ops else np.eye(2**n)
        after.append(after[-1] @ lay)
    after = after[::-1][1:]  # after[i] for layer i
    for layer, rest in zip(layers, after):
        for errors in layer_errors(layer):
            for label, p in stochastic_rates(errors).items():
                full = ["I"] * n
                for q, ch in zip(errors.qubits, label):
                    full[q] = ch
                big = pauli_matrix("".join(full))
                out += p * _weights(rest @ big @ rest.conj().T, n)
    return out


@pytest.mark.parametrize("seed", range(20))
def test_map_equals_generators_and_cirq_on_random_circuits(seed):
    rng = np.random.default_rng(9100 + seed)
    c = random_noisy_circuit(rng, num_qubits=2 + seed % 4, num_layers=3 + seed % 2, coherent_scale=0.01,
                             incoherent=seed % 3 != 0, repeat_count=[None, 2, 3, 4][seed % 4], pauli_rates=seed % 2 == 1)
    for metric in ("process", "state"):
        r = EXACT.run(c, metric)
        got = np.array([r.details["qubit_map"][name] for name in c.qubits])
        np.testing.assert_allclose(got, _reference(c), rtol=1e-9, atol=1e-16)
        assert r.details["qubit_map_quantity"].startswith("first-order marginal process infidelity per qubit")


@pytest.mark.parametrize("seed", range(6))
def test_map_equals_the_clifford_engine_on_clifford_circuits(seed):
    """Folded Clifford blocks (periods, nested) and relaxation: the clifford engine's map."""
    rng = np.random.default_rng(300 + seed)
    c = random_clifford_circuit(rng, 2 + seed % 4, layers=4, repeat=[None, 3, 5, 40][seed % 4], nested=seed % 3 == 0,
                                relaxation=True, rates=seed % 2 == 0)
    a = EXACT.run(c, "process").details["qubit_map"]
    b = CliffordEngine(qubit_map="always", second_order=False).run(c, "process").details["qubit_map"]
    for name, v in b.items():
        assert a[name] == pytest.approx(v, rel=1e-6, abs=1e-12)


def test_map_of_a_wide_loop_is_there_and_says_what_it_left_out():
    """40-qubit Trotter loop at the default threshold: a map over every qubit, no larger than the
    untruncated one plus rounding (rows are only dropped); the brief variant leaves it out."""
    c = ising(40, 3)
    r = PauliEngine().run(c, "process")
    qmap = r.details["qubit_map"]
    assert len(qmap) == 40 and min(qmap.values()) > 0
    assert "left out" in r.details["qubit_map_quantity"]
    assert "qubit_map" not in PauliEngine().brief().run(c, "process").details


def test_map_includes_context_errors():
    """Static ZZ on every coupler (context errors, sites of their layer) plus gate errors on a
    non-Clifford 3-qubit circuit: the same references as above (the generators engine reads the
    same layer normal form; cirq carries the stochastic part)."""
    from budget.circuit.qasm import parse_qasm
    from budget.errors.attach import attach
    from budget.errors.model import ErrorModel

    text = ('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[3] q;\nh q[0]; rx(0.4) q[1];\n'
            "for int i in [1:3] { cx q[0], q[1]; ry(0.3) q[2]; rz(0.7) q[1]; cx q[1], q[2]; }\n")
    model = {"gates": {"cx": {"duration_ns": 200.0, "cphase": 0.003, "avg_infidelity": 1e-3},
                       "rx": {"duration_ns": 30.0, "overrotation": 0.002}, "ry": {"duration_ns": 30.0},
                       "rz": {"z_phase": [0.001]}, "h": {"duration_ns": 30.0}},
             "qubits": {"t1_us": 100.0, "t2_us": 80.0}, "couplings": {"zz_khz": 50.0}}
    c = attach(parse_qasm(text), ErrorModel.from_dict(model))
    assert any(layer.context for layer in c.distinct_layers())
    got = np.array([EXACT.run(c, "process").details["qubit_map"][name] for name in c.qubits])
    np.testing.assert_allclose(got, _reference(c), rtol=1e-9, atol=1e-16)
