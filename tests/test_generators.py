"""The generators engine against closed forms (design.md §6) and cirq's density-matrix simulator.

Sources: design.md §6 check values (closed forms quoted beside each), cirq's
DensityMatrixSimulator through tests/reference.py (independent of the project's engines).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg

from budget.engines.door import choose
from budget.circuit.gates import overrotation_unitary
from budget.circuit.ir import Operation
from budget.engines import get_engine
from budget.engines.generators import dense as _dense
from budget.engines.generators import jumps as _jumps
from budget.engines.generators import states as _states
from budget.engines.matrices import apply as _apply
from budget.engines.base import parse_observable
from budget.engines.generators.engine import MAX_DENSE_QUBITS, GeneratorsEngine
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation, NoisyRepeat, Relaxation
from budget.pauli_algebra import pauli_hamiltonian, pauli_matrix
from budget.problems import TooLargeError
from reference import cirq_final_states, cirq_infidelity, random_noisy_circuit, scaled_incoherent

ENGINE = GeneratorsEngine()


def _nop(name, qubits, h=None, *, params=(), rates=None, depol=0.0, relax=(), knobs=None, values=None, family=None):
    h = h or {}
    k = len(qubits)
    m = sum((c * pauli_matrix(p) for p, c in h.items()), np.zeros((2**k, 2**k), complex))
    return NoisyOperation(
        op=Operation(name, tuple(qubits), tuple(params)),
        family=family or name,
        coherent=scipy.linalg.expm(-1j * m),
        hamiltonian=dict(h),
        pauli_rates=dict(rates or {}),
        depolarizing=depol,
        relaxation=tuple(relax),
        knob_generators=dict(knobs or {}),
        knob_values=dict(values or {}),
    )


def _circuit(n, *items):
    return NoisyCircuit(tuple(f"q[{i}]" for i in range(n)), tuple(items))


def _layer(*ops, idle=()):
    return NoisyLayer(tuple(ops), tuple(idle), 0.0)


def _random_case(seed):
    rng = np.random.default_rng(1000 + seed)
    n = int(rng.integers(1, 6))
    repeat = [None, 2, 3, 4, 6][seed % 5]  # even counts above 2 nest a repeat inside the block
    metric = "process" if (n <= 3 and seed % 2 == 0) else "state"
    c = random_noisy_circuit(
        rng,
        num_qubits=n,
        num_layers=int(rng.integers(2, 4)),
        coherent_scale=float(rng.uniform(0.002, 0.006)),
        repeat_count=repeat,
        pauli_rates=seed % 3 == 0,
    )
    return scaled_incoherent(c, 0.3), metric


# -- design.md §6 check values ----------------------------------------------------------------


@pytest.mark.parametrize("metric", ["process", "state"])
def test_generator_form_of_an_overrotation(metric):
    # design.md §6: an over-rotation δ is h = δ/2 on the Pauli axis; h = 0.01 gives infidelity
    # 9.99967e-5. That number is the exponentiated value sin²(h) (process: 1 - |Tr e^{-ihX}/2|²
    # = 1 - cos² h; state |0>: 1 - |<0|e^{-ihX}|0>|² = sin² h, closed forms); the first-order
    # value is h² = 1e-4.
    h = pauli_hamiltonian(overrotation_unitary("x", (), 0.02))
    assert h == pytest.approx({"X": 0.01}, abs=1e-15)
    r = ENGINE.run(_circuit(1, _layer(_nop("x", (0,), h))), metric)
    assert r.infidelity == pytest.approx(math.sin(0.01) ** 2, rel=1e-12)
    assert r.infidelity == pytest.approx(9.99967e-5, abs=5e-11)
    assert r.first_order == pytest.approx(1e-4, rel=1e-12)
    assert r.shares == pytest.approx({"x": r.infidelity}, rel=1e-12)


@pytest.mark.parametrize("metric", ["process", "state"])
def test_generator_form_of_a_stochastic_rate(metric):
    # design.md §6: a stochastic rate s = 1e-4 gives 9.99900e-5. In the generator picture
    # (Blume-Kohout et al., PRX Quantum 3, 020335 (2022)) s is the rate of S_P[ρ] = PρP - ρ, and
    # e^{s S_P} flips with probability p = (1 - e^{-2s})/2 = s - s² + ... = 9.99900e-5, which is
    # the channel's process infidelity and, for P = X on |0>, its state infidelity. Our model
    # stores the probability p; the engine returns it exactly.
    s = 1e-4
    p = (1 - math.exp(-2 * s)) / 2
    c = _circuit(1, _layer(_nop("x", (0,), rates={"X": p})))
    r = ENGINE.run(c, metric)
    assert r.infidelity == pytest.approx(9.99900e-5, abs=5e-11)
    assert r.infidelity == pytest.approx(cirq_infidelity(c, metric), rel=1e-9)


@pytest.mark.parametrize("metric", ["process", "state"])
def test_hundred_rx_errors_from_the_periodic_closed_form(metric):
    # design.md §6: N = 100 repetitions of RX(0.01): coherent infidelity sin²(Nδ/2) = 0.2298488471
    # (exponentiated; the error commutes with the X cycle, so the amplitudes add), first order
    # N²δ²/4 = 0.25.
    c = _circuit(1, NoisyRepeat((_layer(_nop("x", (0,), {"X": 0.005})),), 100))
    r = ENGINE.run(c, metric)
    assert r.infidelity == pytest.approx(0.2298488471, abs=1e-10)
    assert r.first_order == pytest.approx(0.25, rel=1e-12)
    assert r.details["hamiltonian_norm_rad"] == pytest.approx(0.5, rel=1e-9)


# -- independent reference: cirq's DensityMatrixSimulator ---------------------------------------


def test_random_circuits_agree_with_cirq():
    # 60 seeded random circuits (1-5 qubits, random coherent Pauli generators, depolarizing,
    # T1/T2 relaxation, Pauli rates, repeated and nested blocks): within 5 % of cirq wherever the
    # actual infidelity is at most 0.02; invariants on all of them.
    compared = 0
    for seed in range(60):
        c, metric = _random_case(seed)
        r = ENGINE.run(c, metric)
        assert 0.0 <= r.infidelity <= 1.0
        assert sum(r.shares.values()) == pytest.approx(r.infidelity, rel=1e-9, abs=1e-15)
        ref = cirq_infidelity(c, metric)
        if ref <= 0.02:
            compared += 1
            assert r.infidelity == pytest.approx(ref, rel=0.05), (seed, metric)
    assert compared >= 40


def _observable_gaps(seed, scale, labels):
    rng = np.random.default_rng(77 + seed)
    c = random_noisy_circuit(rng, num_qubits=3, num_layers=3, coherent_scale=0.01 * scale, repeat_count=[None, 3][seed % 2])
    c = scaled_incoherent(c, 0.3 * scale)
    r = ENGINE.run(c, "state", observables=labels)
    psi, rho = cirq_final_states(c)
    out = {}
    for label in labels:
        letters = parse_observable(label, 3)
        o = pauli_matrix("".join(letters.get(q, "I") for q in range(3)))
        ref = float(np.real(np.trace(o @ rho)) - np.real(psi.conj() @ o @ psi))
        out[label] = (ref, r.observable_errors[label] - ref)
    return out


def test_observable_errors_are_exact_to_first_order():
    # Observable errors (coherent part exponentiated, incoherent jump terms in the Heisenberg
    # picture) against <O>_actual - <O>_ideal from cirq's density matrix. Exact to first order
    # means the remaining gap is second order: halving every error (coherent angles and
    # incoherent probabilities) must cut the gap about four times while the error itself halves.
    labels = ("Z0", "X1Z2", "Y0Y1", "Z0Z1Z2", "X0")
    checked = 0
    for seed in range(4):
        big, small = _observable_gaps(seed, 0.25, labels), _observable_gaps(seed, 0.125, labels)
        for label in labels:
            (ref_b, gap_b), (ref_s, gap_s) = big[label], small[label]
            if abs(ref_b) < 1e-4:
                continue
            checked += 1
            assert ref_s == pytest.approx(ref_b / 2, rel=0.1)  # the error is first order
            assert abs(gap_b) < 0.15 * abs(ref_b), (seed, label)
            assert abs(gap_s) < abs(gap_b) / 3 + 1e-12, (seed, label, gap_b, gap_s)
    assert checked >= 8


def test_amplitude_damping_uses_jump_operators_not_the_twirl():
    # |0> is a fixed point of amplitude damping: no state error (design.md §4), while the process
    # infidelity is its twirl γ/2 - ... (Tomita & Svore, PRA 90, 062320 (2014)); cirq agrees.
    relax = Relaxation(0, 50.0, 0.01, 1.0)
    c = _circuit(1, _layer(_nop("id", (0,), relax=(relax,))))
    assert ENGINE.run(c, "state").infidelity == pytest.approx(0.0, abs=1e-15)
    assert ENGINE.run(c, "process").infidelity == pytest.approx(sum(relax.pauli_twirl()), rel=1e-12)
    assert ENGINE.run(c, "process").infidelity == pytest.approx(cirq_infidelity(c, "process"), rel=1e-9)
    flipped = _circuit(1, _layer(_nop("x", (0,), relax=(relax,))))
    assert ENGINE.run(flipped, "state").infidelity == pytest.approx(0.01, rel=1e-12)  # γ <n>, n = 1
    assert cirq_infidelity(flipped, "state") == pytest.approx(0.01, rel=1e-9)


# -- invariants ----------------------------------------------------------------------------------


def _knob_circuit():
    # knob generators consistent with the Hamiltonian: H = Σ value · generator exactly
    # (z_phase on each qubit of a cz, cphase, an overrotation of sx)
    cz_knobs = {
        "z_phase[0]": {"ZI": 0.5},
        "z_phase[1]": {"IZ": 0.5},
        "cphase": {"ZI": 0.25, "IZ": 0.25, "ZZ": -0.25},
    }
    cz_vals = {"z_phase[0]": 0.012, "z_phase[1]": -0.007, "cphase": 0.02}
    h_cz: dict[str, float] = {}
    for k, g in cz_knobs.items():
        for p, c in g.items():
            h_cz[p] = h_cz.get(p, 0.0) + cz_vals[k] * c
    sx = {"overrotation": {"X": 0.5}}

    def sx_op(q, v):
        return _nop("sx", (q,), {"X": 0.5 * v}, knobs=sx, values={"overrotation": v}, depol=1e-4)

    layers = [
        _layer(sx_op(0, 0.01), sx_op(1, 0.01), sx_op(2, 0.006)),
        _layer(_nop("cz", (0, 1), h_cz, knobs=cz_knobs, values=cz_vals)),
        _layer(_nop("h", (2,), {"Z": 0.004})),  # no knob generators: the plain "pauli" knob
    ]
    return _circuit(3, layers[0], NoisyRepeat((layers[1], layers[0]), 3), layers[2], layers[1])


@pytest.mark.parametrize("metric", ["process", "state"])
def test_quadratic_form_reproduces_the_first_order_coherent_part(metric):
    c = _knob_circuit()
    qf = ENGINE.quadratic_form(c, metric)
    r = ENGINE.run(c, metric)
    delta = qf.values_rad
    assert set(qf.labels) == {("sx", "overrotation"), ("cz", "z_phase[0]"), ("cz", "z_phase[1]"), ("cz", "cphase"), ("h", "pauli")}
    assert float(delta @ qf.matrix @ delta) == pytest.approx(r.details["coherent_first_order"], rel=1e-10)
    assert qf.floor == pytest.approx(r.details["stochastic_first_order"], rel=1e-12)
    assert np.allclose(qf.matrix, qf.matrix.T)
    assert np.all(np.linalg.eigvalsh(qf.matrix) > -1e-14)  # a variance: positive semidefinite


def test_shares_add_up_even_when_clipped():
    # a coherent error far beyond first order: infidelity clipped to 1 by the stochastic sum,
    # shares rescaled to the clipped total; the warning says which engine to trust
    c = _circuit(1, NoisyRepeat((_layer(_nop("x", (0,), {"Z": 0.2}, rates={"Y": 0.2})),), 5))
    r = ENGINE.run(c, "process")
    assert r.infidelity == 1.0
    assert sum(r.shares.values()) == pytest.approx(1.0)
    assert any("first-order model is leaving its range" in w and "exact engine" in w for w in r.warnings)


def test_no_warning_for_small_errors():
    r = ENGINE.run(_circuit(1, _layer(_nop("x", (0,), {"X": 0.01}))), "process")
    assert r.warnings == ()


def test_cost_of_a_repeated_block_does_not_grow_with_the_count(monkeypatch):
    # the periodic closed form: N = 10**6 runs the same number of gate applications as N = 1
    calls = {"n": 0}
    real = _apply.apply

    def counting(*a, **k):
        calls["n"] += 1
        return real(*a, **k)

    for mod in (_dense, _jumps, _states):
        monkeypatch.setattr(mod, "apply", counting)
    rng = np.random.default_rng(3)
    base = random_noisy_circuit(rng, num_qubits=3, num_layers=2, repeat_count=3)
    block = next(it for it in base.body if isinstance(it, NoisyRepeat))
    counts = []
    for n_rep in (1, 10**6):
        c = NoisyCircuit(base.qubits, (base.body[0], NoisyRepeat(block.body, n_rep), base.body[-1]))
        calls["n"] = 0
        r = ENGINE.run(c, "state")
        counts.append(calls["n"])
        assert 0 <= r.infidelity <= 1
    assert counts[0] == counts[1]


def test_sampled_repeats_are_reported():
    # nested repeats with many repetitions: the incoherent state term is estimated from sampled
    # repetitions; the warning says so, and the estimate stays close to the repetition-by-
    # repetition sum (same engine on the unrolled circuit)
    rng = np.random.default_rng(11)
    c = random_noisy_circuit(rng, num_qubits=2, num_layers=1, coherent_scale=0.0, repeat_count=200)
    c = scaled_incoherent(c, 0.05)
    r = ENGINE.run(c, "state")
    assert any("evenly spaced repetitions" in w for w in r.warnings)
    unrolled = NoisyCircuit(c.qubits, tuple(c.iter_layers()))
    assert r.infidelity == pytest.approx(ENGINE.run(unrolled, "state").infidelity, rel=0.05)


# -- reach ---------------------------------------------------------------------------------------


def test_too_large_names_the_limit_and_the_alternative():
    n = MAX_DENSE_QUBITS + 1
    c = _circuit(n, _layer(*[_nop("h", (q,), {"X": 1e-3}) for q in range(n)]))
    reason = ENGINE.fits(c, "process")
    assert reason == f"dense matrices, limit {MAX_DENSE_QUBITS} qubits"
    with pytest.raises(TooLargeError, match="limit"):
        ENGINE.run(c, "process")
    with pytest.raises(TooLargeError, match="clifford or pauli fits"):
        choose(c, "process", "generators")
    assert ENGINE.fits(c, "state") is None  # state vectors reach further
    assert ENGINE.fits(_circuit(3, _layer(_nop("x", (0,)))), "process") is None


def test_registry_returns_the_engine_and_unknown_metrics_are_refused():
    assert get_engine("generators").name == "generators"
    c = _circuit(1, _layer(_nop("x", (0,))))
    assert "not one of" in ENGINE.fits(c, "average")
    with pytest.raises(ValueError, match="metric 'average'"):
        ENGINE.run(c, "average")
