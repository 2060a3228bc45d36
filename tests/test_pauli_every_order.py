"""Pauli engine: the coherent part to every order on small light cones (budget/engines/pauli/_allorders.py).

References: cirq unitaries of one block raised to the N-th power with numpy (tests/echo_reference.py);
nothing of the engines is used there. Values recalled from memory: none.
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest
from echo_reference import as_circuit, cycle_unitaries, infidelity, op, repeated, xy4_cycle

from budget.engines.clifford.allorders import component_infidelity
from budget.engines.pauli._allorders import LightCones
from budget.engines.pauli.engine import PauliEngine
from budget.errors.noisy import NoisyCircuit, NoisyLayer

PAULI = PauliEngine(truncate=0.0)


def _echo_with_rotation(n: int, delta: float, angle: float) -> tuple[NoisyLayer, ...]:
    """x/y/x/y on every qubit with over-rotations, an error-free cz pair between qubits 0 and 1,
    and rx(angle) with a small z error on qubit 0 (non-Clifford unless angle is a multiple of π/2)."""
    cyc = xy4_cycle(np.random.default_rng(4), n, delta)
    pair = tuple(NoisyLayer((op("cz", (0, 1), {}),), (), 0.0) for _ in range(2))
    rot = NoisyLayer((op("rx", (0,), {"Z": delta / 3}, (angle,)),), (), 0.0)
    return cyc + pair + (rot,)


def _mp_reference(u1: np.ndarray, v1: np.ndarray, count: int, metric: str) -> float:
    """Infidelity of N cycles in 40-digit arithmetic (mpmath): cirq's double-precision cycle
    unitaries are first made unitary to 40 digits (Newton's iteration X <- (X + X^-†)/2 for the
    polar factor; Higham, Functions of Matrices (2008), §8.9), since their rounding (1e-16 per
    entry) would otherwise grow like N x 1e-16 in 1 - |Tr|²; then powers by repeated squaring."""
    with mpmath.workdps(40):
        mats = []
        for m in (u1, v1):
            x = mpmath.matrix(m.tolist())
            for _ in range(4):
                x = (x + (x ** -1).H) / 2
            mats.append(x**count)
        un, vn = mats
        d = u1.shape[0]
        cols = range(d) if metric == "process" else range(1)
        t = sum(mpmath.conj(un[i, j]) * vn[i, j] for i in range(d) for j in cols) / (d if metric == "process" else 1)
        return float(1 - abs(t) ** 2)


@pytest.mark.parametrize("count", [10, 1000, 10**6, 10**9])
def test_folded_block_costs_the_same_for_every_count(count):
    # the light-cone pass folds the block by matrix powers: no layer is walked whatever N is, and
    # the value equals the block unitary raised to the N-th power in 40-digit arithmetic
    n, delta = 3, 0.02 / np.sqrt(count)
    cyc = _echo_with_rotation(n, delta, 0.7)
    c = as_circuit(n, cyc, count)
    cones = LightCones(n)
    comps = cones.run(c.body)
    assert cones.walked == 0 and cones.largest <= n
    u1, v1 = cycle_unitaries(c.qubits, cyc)
    for metric in ("process", "state"):
        ref = _mp_reference(u1, v1, count, metric)
        got, _ = component_infidelity(comps, metric)
        # double precision: each eigenphase carries ~1e-16 rad of rounding, N times over, against a
        # summed error amplitude sqrt(ref): 1e-7 / 8e-5 at N = 10^9
        rel = 1e-3 if count <= 10**6 else 1e-2
        assert got == pytest.approx(ref, rel=rel), (metric, got, ref)


def test_clifford_block_of_many_cycles_through_the_engine():
    # x/y/x/y (Clifford): the first-order sweep folds by the period and the light-cone pass by
    # powers; 2 x 10^5 cycles (the engine's fits() stops at 10^6 executed layers)
    n, count = 2, 200_000
    cyc = xy4_cycle(np.random.default_rng(8), n, 1e-6)
    c = as_circuit(n, cyc, count)
    u1, v1 = cycle_unitaries(c.qubits, cyc)
    for metric in ("process", "state"):
        r = PAULI.run(c, metric)
        assert r.infidelity == pytest.approx(_mp_reference(u1, v1, count, metric), rel=1e-3)
        assert r.details["coherent_order"] == "all orders (light cones of at most 1 qubit)"


def test_wide_light_cones_fall_back_to_the_second_order():
    # a cx chain spreads every error over 10 qubits: beyond the 8-qubit reach the engine keeps its
    # second-order value and says why; no cancellation here, so it is within 5 % of cirq
    rng = np.random.default_rng(12)
    n = 10
    layers = [NoisyLayer(tuple(op("h", (q,), {"X": float(rng.normal(0, 0.003))}) for q in range(n)), (), 0.0)]
    layers += [NoisyLayer((op("cx", (q, q + 1), {"ZZ": float(rng.normal(0, 0.003))}),), (), 0.0) for q in range(n - 1)]
    layers += [NoisyLayer(tuple(op("t", (q,), {"Z": 0.002}) for q in range(n)), (), 0.0)]
    c = NoisyCircuit(tuple(f"q[{i}]" for i in range(n)), tuple(layers))
    u, v = repeated(c.qubits, tuple(layers), 1)
    for metric in ("process", "state"):
        r = PAULI.run(c, metric)
        assert r.details["coherent_order"].endswith("(all orders out of reach: support)")
        assert r.infidelity == pytest.approx(infidelity(u, v, metric), rel=0.05)


def test_shares_add_up_when_every_order_decides():
    # an exactly cancelled x/y/x/y: the first order is 0, every order gives the value; the family
    # shares follow the first-order term sizes and add up to the reported infidelity
    c = as_circuit(1, xy4_cycle(np.random.default_rng(3), 1, 0.01), 200)
    r = PAULI.run(c, "process")
    assert r.first_order < 1e-20 < r.infidelity
    assert sum(r.shares.values()) == pytest.approx(r.infidelity, rel=1e-9)
    assert set(r.shares) == {"x", "y"} and all(v > 0 for v in r.shares.values())
