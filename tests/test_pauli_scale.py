"""The pauli engine's state-metric read-offs and jump-cost bound, against references outside it.

- small registers read from the state vector (module ``_vector``): equal to the generators engine
  (dense matrices and state vectors, a different code path) and to the sparse path with jump tags;
  the Walsh-Hadamard application of a Pauli sum equals cirq's PauliSum matrix on a state vector;
- the jump-cost bound of ``_readout.jump_costs``: for jump operators of real operations, random
  two-qubit states (cirq's random density matrices) and read-offs anywhere within the stated l1
  distance of the true Pauli expectations (distances up to 3, past the [-1, 1] range), the cost
  p (<L†L> - |<L>|²) moves by no more than the bound (a variance lies in [0, p λ_max(L†L)]:
  Nielsen & Chuang, 2000, §2.2.5, common practice);
- the truncated state metric on 7-qubit Ising loops, sparse path: |truncated - untruncated| ≤
  bound, and halving the threshold moves the value by no more than the previous bound.
"""

from __future__ import annotations

import cirq
import numpy as np
import pytest

from budget.engines.generators.engine import GeneratorsEngine
from budget.engines.matrices.channels import by_family
from budget.engines.pauli import PauliEngine
from budget.engines.pauli._local import local_basis
from budget.engines.pauli._plan import PlanBook
from budget.engines.pauli._readout import jump_costs
from budget.engines.pauli._store import Store, from_local
from budget.engines.pauli._vector import apply_sum, fits_vector
from pauli_cases import ising
from reference import random_noisy_circuit


def test_small_register_state_metric_equals_generators_and_the_tag_path():
    for seed in range(6):
        rng = np.random.default_rng(3100 + seed)
        c = random_noisy_circuit(rng, num_qubits=3 + seed % 3, num_layers=4, coherent_scale=0.02,
                                 repeat_count=[None, 3][seed % 2])
        assert fits_vector(c)
        want = GeneratorsEngine().run(c, "state").first_order
        vec = PauliEngine(truncate=0.0).run(c, "state")
        tags = PauliEngine(truncate=0.0, vector_qubits=0).run(c, "state")
        assert vec.first_order == pytest.approx(want, rel=1e-9)
        assert tags.first_order == pytest.approx(want, rel=1e-9)
        for f, v in tags.shares.items():
            assert vec.shares[f] == pytest.approx(v, rel=1e-9, abs=1e-15)


def test_walsh_application_of_a_pauli_sum_matches_cirq():
    rng = np.random.default_rng(3200)
    n = 5
    qs = cirq.LineQubit.range(n)
    codes = rng.integers(0, 4, size=(40, n))  # one-qubit codes I, X, Z, Y per qubit
    coef = rng.normal(size=(40, 1))
    rows = [from_local(n, np.array([q]), np.array([-1]), np.array([codes[r, q]]), np.zeros(1, np.int64), np.ones((1, 1)))
            for r in range(40) for q in range(n)]
    x = np.zeros((40, 1), np.uint64)
    z = np.zeros((40, 1), np.uint64)
    for i, row in enumerate(rows):
        x[i // n] |= row.x[0]
        z[i // n] |= row.z[0]
    s = Store(x, z, np.zeros(40, np.int64), coef)
    psi = cirq.testing.random_superposition(2**n, random_state=3201).reshape((2,) * n)
    got = apply_sum(s, psi, n)[0]
    letters = {0: cirq.I, 1: cirq.X, 2: cirq.Z, 3: cirq.Y}
    total = sum((float(coef[r, 0]) * cirq.PauliString({qs[q]: letters[codes[r, q]] for q in range(n) if codes[r, q]})
                 for r in range(40)), cirq.PauliSum())
    want = total.matrix(qs) @ psi.reshape(-1)  # cirq: qubit 0 most significant
    flat_want = want.reshape((2,) * n).transpose(tuple(reversed(range(n)))).reshape(-1)  # bit q = qubit q
    assert np.allclose(got, flat_want, atol=1e-12)


def _sites():
    rng = np.random.default_rng(3300)
    c = random_noisy_circuit(rng, num_qubits=3, num_layers=6, coherent_scale=0.02, pauli_rates=True)
    book = PlanBook(3, "pull", lambda nop: [], {}, jumps=True, generators=False)  # jump sites only
    return [site for layer in c.distinct_layers() for site in book(layer).jump_sites]


@pytest.mark.parametrize("seed", range(4))
def test_jump_cost_bound_holds_for_any_read_off_within_the_dropped_norm(seed):
    rng = np.random.default_rng(3400 + seed)
    sites = _sites()
    assert any(s.qb >= 0 for s in sites) and any(s.qb < 0 for s in sites)
    for site in sites:
        k = 1 if site.qb < 0 else 2
        for _ in range(25):
            rho = cirq.testing.random_density_matrix(2**k, random_state=int(rng.integers(2**31)))
            true = np.einsum("vij,ji->v", local_basis(k)[site.needed], rho).real
            dropped = rng.uniform(0, 3.0, len(true)) * (rng.random(len(true)) < 0.7)
            read = true + dropped * rng.uniform(-1, 1, len(true))
            (c_true,), _ = _cost([site], true, np.zeros(0))
            (c_read,), bound = _cost([site], read, dropped)
            assert c_true >= -1e-15  # a variance
            assert abs(c_read - c_true) <= bound * (1 + 1e-12) + 1e-15


def _cost(sites, values, dropped):
    costs, bound = jump_costs([(s, 0, 1) for s in sites], values, dropped)
    return list(costs.values()), bound


@pytest.mark.parametrize("steps", [2, 3])
def test_truncated_state_metric_bound_is_honest_on_ising_loops(steps):
    c = ising(7, steps, scale=3.0)
    exact = PauliEngine(truncate=0.0, vector_qubits=0, second_order=False).run(c, "state").first_order
    assert exact == pytest.approx(GeneratorsEngine().run(c, "state").first_order, rel=1e-9)
    for eps in (1e-3, 1e-4, 1e-5):
        r = PauliEngine(truncate=eps, vector_qubits=0, second_order=False).run(c, "state")
        half = PauliEngine(truncate=eps / 2, vector_qubits=0, second_order=False).run(c, "state")
        bound = r.details["truncation_bound"]
        assert bound > 0
        assert abs(r.first_order - exact) <= bound
        assert abs(half.first_order - r.first_order) <= bound
