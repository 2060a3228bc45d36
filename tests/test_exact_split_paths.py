"""The exact engine's fast paths give the values of the plain ones.

- Family split: the batched runs that share the joint run's ideal circuit and local matrices
  (budget/engines/exact/engine.py) give the isolated infidelities of separate plain runs on
  ``only_family`` circuits (one engine run each, own ideal), to 1e-12, on the example circuits.
- The plain runs themselves against cirq's simulators (tests/reference.py) where cirq is quick.
- The superoperator read in the Pauli basis, F_pro = Tr(R_idealᵀ R)/d², against Nielsen's Kraus
  formula F_pro = (1/d²) Σ_k |Tr(U† K_k)|² (Nielsen, Phys. Lett. A 303, 249 (2002)) on seeded
  random channels, and the unitary's transfer matrix against the one built with the full Kronecker
  basis change.
"""

from __future__ import annotations

import dataclasses
from functools import reduce
from pathlib import Path

import cirq
import numpy as np
import pytest

from budget.analysis.run import attach_grouped, read_circuit, read_model
from budget.engines.exact import ExactEngine
from budget.engines.exact.local import PAULI_BASIS, pauli_transfer, to_interleaved
from budget.engines.exact.readout import from_pauli, process_infidelity, unitary_ptm
from budget.engines.exact.split import error_families, family_groups, only_family
from budget.errors.noisy import IDLE
from reference import cirq_infidelity, mapped, random_noisy_circuit

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = [("parity_cycle.qasm", "fen_q8.toml"), ("hopping_trotter.qasm", "fen_q8.toml"),
            ("pair_memory_zz.qasm", "fen_pair_zz.toml"), ("echo_xy4.qasm", "fen_q8.toml")]


def _example(qasm: str, model: str):
    return attach_grouped(read_circuit(ROOT / "circuits" / qasm), read_model(ROOT / "circuits" / model))


def _isolated(result) -> dict[str, float]:
    """e_f back from share_f = e_f · e / Σ e_g (budget/engines/exact/split.py)."""
    total, s = result.infidelity, result.details.split.isolated_sum
    return {f: v * s / total for f, v in result.shares.items()}


@pytest.mark.parametrize("metric", ["process", "state"])
@pytest.mark.parametrize("qasm, model", EXAMPLES)
def test_split_values_equal_separate_plain_runs_on_the_examples(qasm, model, metric):
    c = _example(qasm, model)
    r = ExactEngine().run(c, metric)
    families = error_families(c)
    plain = ExactEngine("cheapest", split=False)
    separate = {f: plain.run(only_family(c, f), metric).infidelity for f in families}
    assert r.infidelity == pytest.approx(ExactEngine().brief().run(c, metric).infidelity, abs=1e-15)
    if len(families) == 1:
        assert r.shares == {families[0]: r.infidelity}
        return
    assert r.details.split.family_runs == len(families)
    assert r.details.split.isolated_sum == pytest.approx(sum(separate.values()), abs=1e-12)
    for f, e in _isolated(r).items():
        assert e == pytest.approx(separate[f], abs=1e-12), f


@pytest.mark.parametrize("qasm, model, metric", [
    ("parity_cycle.qasm", "fen_q8.toml", "state"),
    ("hopping_trotter.qasm", "fen_q8.toml", "state"),
    ("pair_memory_zz.qasm", "fen_pair_zz.toml", "process"),
    ("echo_xy4.qasm", "fen_q8.toml", "process"),
])
def test_plain_family_runs_on_the_examples_match_cirq(qasm, model, metric):
    c = _example(qasm, model)
    for f in error_families(c):
        alone = only_family(c, f)
        assert ExactEngine("cheapest", split=False).run(alone, metric).infidelity == pytest.approx(
            cirq_infidelity(alone, metric), rel=1e-9, abs=1e-13), f


def _coherent_only(circuit, families: set[str]):
    """The same circuit with the incoherent errors of ``families`` removed (their runs then go
    through the circuit as unitaries or state vectors, the others as channels)."""

    def operation(nop):
        if nop.family not in families:
            return nop
        return dataclasses.replace(nop, pauli_rates={}, depolarizing=0.0, relaxation=())

    return mapped(circuit, operation, lambda layer: layer.idle)


@pytest.mark.parametrize("count", [4, 300])
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_batched_split_with_repeats_matches_separate_runs_on_random_circuits(seed, count):
    """Repeats unrolled (N = 4) and taken as block powers (N = 300) in the batched runs, with
    families of both register forms."""
    rng = np.random.default_rng(seed)
    c = random_noisy_circuit(rng, num_qubits=3, num_layers=3, coherent_scale=0.05, repeat_count=count)
    c = _coherent_only(c, set(error_families(c)[::2]) - {IDLE})
    assert len(family_groups(c, error_families(c))) == 2
    for metric in ("process", "state"):
        r = ExactEngine().run(c, metric)
        separate = {f: ExactEngine("cheapest", split=False).run(only_family(c, f), metric).infidelity
                    for f in error_families(c)}
        for f, e in _isolated(r).items():
            assert e == pytest.approx(separate[f], abs=1e-12), (metric, f)


def _random_channel(rng: np.random.RandomState, k: int, terms: int) -> list[np.ndarray]:
    """Kraus operators K_j = √p_j V_j of a mixture of random unitaries (cirq.testing, seeded)."""
    p = rng.dirichlet(np.ones(terms))
    return [np.sqrt(pj) * cirq.testing.random_unitary(2**k, random_state=rng) for pj in p]


@pytest.mark.parametrize("k", [1, 2, 3])
def test_pauli_basis_process_fidelity_equals_the_kraus_formula(k):
    rng = np.random.RandomState(40 + k)  # cirq.testing takes a legacy RandomState
    d = 2**k
    kraus = _random_channel(rng, k, 3)
    u = cirq.testing.random_unitary(d, random_state=rng)
    superop = sum(to_interleaved(np.kron(m, m.conj()), k) for m in kraus)
    r = pauli_transfer(superop, k)
    nielsen = sum(abs(np.trace(u.conj().T @ m)) ** 2 for m in kraus) / d**2
    assert process_infidelity(unitary_ptm(u, k), r, k) == pytest.approx(1 - nielsen, abs=1e-13)


@pytest.mark.parametrize("k", [1, 2, 3])
def test_unitary_transfer_matrix_and_the_way_back(k):
    rng = np.random.RandomState(50 + k)
    u = cirq.testing.random_unitary(2**k, random_state=rng)
    full = pauli_transfer(to_interleaved(np.kron(u, u.conj()), k), k)  # the whole T ⊗…⊗ T at once
    assert np.allclose(unitary_ptm(u, k), full, atol=1e-14)
    t = reduce(np.kron, [PAULI_BASIS] * k)
    assert np.allclose(from_pauli(full, k), t.conj().T @ full @ t, atol=1e-14)
    column = full[:, :1]
    assert np.allclose(from_pauli(column, k), t.conj().T @ column, atol=1e-14)
