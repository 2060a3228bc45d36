"""The periodic closed form against explicit unrolling, and the depth curve against single runs.

Sources: the closed form is checked against the plain sum Σ_k U^k H U^{-k} computed term by term
(definition, design.md §4), against the doubling identity G_2N(x) = G_N(x)(1 + e^{-iNx}) of the
geometric sum (algebra), and against design.md §6 (N = 100 repetitions of RX(0.01)).
"""

from __future__ import annotations

import math

import cirq
import numpy as np
import pytest

from budget.engines.generators.depth import depth_curve
from budget.engines.generators.engine import GeneratorsEngine
from budget.engines.matrices.periodic import (
    accumulation_split,
    coherent_curve,
    cycle_basis,
    geometric_sum,
    periodic_sum,
    repeated_means,
    repeated_squares,
    state_components,
)
from budget.errors.noisy import NoisyCircuit, NoisyRepeat
from reference import random_noisy_circuit, scaled_incoherent

_q = cirq.LineQubit.range(3)
CYCLES = {
    "random 2q": cirq.testing.random_unitary(4, random_state=1),
    "random 3q": cirq.testing.random_unitary(8, random_state=2),
    "clifford 3q": cirq.unitary(
        cirq.Circuit(cirq.H(_q[0]), cirq.CNOT(_q[0], _q[1]), cirq.S(_q[2]), cirq.CZ(_q[1], _q[2]), cirq.X(_q[2]))
    ),
    "identity": np.eye(8, dtype=complex),
    "minus identity": -np.eye(4, dtype=complex),  # quasi-energies at the ±π seam
    "degenerate non-Clifford": np.kron(cirq.testing.random_unitary(2, random_state=4), np.eye(4)),
}


def _random_hermitian(d, seed):
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(d, d)) + 1j * rng.normal(size=(d, d))
    return (a + a.conj().T) / 2


def _unrolled(u, h, count):
    total = np.zeros_like(h)
    power = np.eye(u.shape[0], dtype=complex)
    for _ in range(count):
        total += power @ h @ power.conj().T
        power = u @ power
    return total


@pytest.mark.parametrize("name", list(CYCLES))
def test_closed_form_equals_unrolling(name):
    u = CYCLES[name]
    h = _random_hermitian(u.shape[0], 7)
    basis = cycle_basis(u)
    for count in (1, 2, 7, 64, 300):
        assert np.allclose(periodic_sum(basis, h, count), _unrolled(u, h, count), atol=1e-9, rtol=0)
    assert np.allclose(basis.power(300), np.linalg.matrix_power(u, 300), atol=1e-9)


def test_geometric_sum_is_stable_for_huge_counts():
    x = np.array([0.0, 1e-12, 3e-7, 0.4, -2.5, np.pi])
    for count in (1, 5, 123):
        direct = np.exp(-1j * np.outer(np.arange(count), x)).sum(axis=0)
        assert np.allclose(geometric_sum(x, count), direct, atol=1e-9)
    n = 5 * 10**8  # doubling identity up to N = 10**9
    doubled = geometric_sum(x[2:], n) * (1 + np.exp(-1j * n * x[2:]))
    assert np.allclose(geometric_sum(x[2:], 2 * n), doubled, rtol=1e-6, atol=1e-6)
    assert geometric_sum(np.array(0.0), 10**9) == 10**9


@pytest.mark.parametrize("name", ["random 3q", "clifford 3q", "identity", "degenerate non-Clifford"])
def test_accumulation_split_bounds_the_first_order_curve(name):
    # e(N) = ||S_N(H)||_F²/d = (N g)² + b(N)² with b(N) <= bounded for every N (periodic.py)
    u = CYCLES[name]
    d = u.shape[0]
    h = _random_hermitian(d, 3)
    h -= np.trace(h) / d * np.eye(d)
    growing, bounded = accumulation_split(u, h)
    for count in (1, 3, 50, 1000):
        e = np.linalg.norm(periodic_sum(u, h, count)) ** 2 / d
        rest = e - (count * growing) ** 2
        assert -1e-9 * e <= rest <= bounded**2 * (1 + 1e-9) + 1e-12 * e


def test_split_of_echoed_and_commuting_errors():
    x = np.array([[0, 1], [1, 0]], dtype=complex)
    z = np.diag([1.0 + 0j, -1.0])
    assert accumulation_split(x, 0.01 * x) == pytest.approx((0.01, 0.0))  # commutes: builds up
    g, b = accumulation_split(x, 0.01 * z)  # anticommutes with an X cycle: echoed
    assert g == pytest.approx(0.0, abs=1e-15)
    assert b == pytest.approx(0.01)  # sin(π/2) = 1: bounded by the single-cycle size


def test_coherent_curve_reproduces_the_design_value():
    # design.md §6: N = 100 repetitions of RX(0.01): sin²(0.5) = 0.2298488471; first order 0.25.
    # N = 10**9 with h = 1e-10: sin²(0.1), the closed form does not lose precision.
    x = np.array([[0, 1], [1, 0]], dtype=complex)
    c = coherent_curve(x, 0.005 * x, [1, 100])
    assert c.infidelity == pytest.approx([math.sin(0.005) ** 2, 0.2298488471], abs=1e-10)
    assert c.first_order == pytest.approx([2.5e-5, 0.25], rel=1e-12)
    big = coherent_curve(x, 1e-10 * x, [10**9], state=np.array([1.0, 0.0], dtype=complex))
    assert big.infidelity[0] == pytest.approx(math.sin(0.1) ** 2, rel=1e-6)


@pytest.mark.parametrize("name", ["random 3q", "clifford 3q", "identity"])
def test_repeated_state_sums_equal_unrolling(name):
    u = CYCLES[name]
    rng = np.random.default_rng(5)
    psi = rng.normal(size=8) + 1j * rng.normal(size=8)
    psi /= np.linalg.norm(psi)
    ops = [_random_hermitian(8, s) + 1j * _random_hermitian(8, s + 1) for s in range(3)]
    v, energies = state_components(cycle_basis(u), psi)
    a = np.array([v.conj() @ o @ v.T for o in ops])
    counts = [1, 6, 250]
    means, squares = repeated_means(a, energies, counts), repeated_squares(a, energies, counts)
    for i, count in enumerate(counts):
        vals = []
        state = psi
        for _ in range(count):
            vals.append([np.vdot(state, o @ state) for o in ops])
            state = u @ state
        vals = np.array(vals)
        assert np.allclose(means[:, i], vals.sum(axis=0), atol=1e-9)
        assert np.allclose(squares[:, i], (np.abs(vals) ** 2).sum(axis=0), atol=1e-9)


@pytest.mark.parametrize("metric", ["process", "state"])
def test_engine_on_a_repeat_equals_the_engine_on_the_unrolled_circuit(metric):
    # nested repeats through the closed form versus the same engine on the unrolled layers (first
    # order: with the second order the unrolled circuit is exact within its plain layers, the
    # repeat second order across cycles; tests/test_second_order.py checks that against cirq)
    engine = GeneratorsEngine(second_order=False)
    for seed in range(4):
        rng = np.random.default_rng(40 + seed)
        c = random_noisy_circuit(rng, num_qubits=3, num_layers=2, coherent_scale=0.004, repeat_count=[5, 8][seed % 2])
        a = engine.run(c, metric)
        b = engine.run(NoisyCircuit(c.qubits, tuple(c.iter_layers())), metric)
        assert a.infidelity == pytest.approx(b.infidelity, rel=1e-9)
        assert a.first_order == pytest.approx(b.first_order, rel=1e-9)
        assert a.shares == pytest.approx(b.shares, rel=1e-7, abs=1e-14)


@pytest.mark.parametrize("metric", ["process", "state"])
def test_depth_curve_equals_single_runs(metric):
    engine = GeneratorsEngine()
    rng = np.random.default_rng(9)
    c = random_noisy_circuit(rng, num_qubits=2, num_layers=2, coherent_scale=0.01)
    counts = [1, 3, 40, 1000]
    curve = depth_curve(c, metric, counts)
    for i, count in enumerate(counts):
        single = engine.run(NoisyCircuit(c.qubits, (NoisyRepeat(c.body, count),)), metric)
        assert curve.infidelity[i] == pytest.approx(single.infidelity, rel=1e-9)
        assert curve.first_order[i] == pytest.approx(single.first_order, rel=1e-9)
    assert engine.depth_curve(c, metric, counts).counts == tuple(counts)


def test_long_repeats_agree_with_the_exact_engine():
    # blocks repeated up to 10**6 times (errors scaled down with N so the total stays small):
    # the periodic closed form against the exact engine's matrix powers (budget/engines/exact/engine.py,
    # dense simulation, itself checked against cirq in its own tests)
    from budget.engines.exact.engine import ExactEngine

    exact, engine = ExactEngine(), GeneratorsEngine()
    for seed, count in enumerate([999, 100001, 301, 10**6 + 1]):
        rng = np.random.default_rng(500 + seed)
        c = random_noisy_circuit(rng, num_qubits=3 + seed % 2, num_layers=2, coherent_scale=0.02 / count, repeat_count=count)
        c = scaled_incoherent(c, 0.1 / count)
        for metric in ("state", "process"):
            ref = exact.run(c, metric).infidelity
            assert 1e-4 < ref < 0.02
            assert engine.run(c, metric).infidelity == pytest.approx(ref, rel=0.01), (seed, metric)
