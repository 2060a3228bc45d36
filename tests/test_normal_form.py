"""The normal form of a noisy layer (budget/errors/normal_form.py) against cirq's channels.

Reference: cirq's DensityMatrixSimulator on the Choi state (the operation's error channel applied
to one half of a maximally entangled pair, written as cirq channels), so F_pro = <Φ|ρ|Φ>. To first
order (Blume-Kohout et al., PRX Quantum 3, 020335 (2022)) the process infidelity is
Σ_P h_P² + Σ p_P + (p_x + p_y + p_z of each relaxation, its Pauli twirl: Tomita & Svore,
PRA 90, 062320 (2014)); the cross terms are of second order in the small errors.
"""

from __future__ import annotations

import cirq
import numpy as np
import pytest
import scipy.linalg

from budget.circuit.ir import Operation
from budget.errors.noisy import NoisyOperation, Relaxation
from budget.errors.normal_form import (
    TermKind,
    hamiltonian,
    idle_errors,
    jump_operators,
    operation_errors,
    relaxation_jumps,
    stochastic_process,
    stochastic_rates,
)
from budget.pauli_algebra import pauli_matrix


def _random_operation(rng: np.random.Generator, k: int, scale: float) -> NoisyOperation:
    labels = ["X", "Y", "Z"] if k == 1 else ["XI", "ZZ", "IY", "XY"]
    ham = {lab: float(rng.normal() * scale) for lab in rng.choice(labels, 2, replace=False)}
    h = sum(c * pauli_matrix(p) for p, c in ham.items())
    rates = {str(rng.choice(labels)): float(rng.uniform(0, scale**2))}
    relax = tuple(Relaxation(q, 40.0, float(rng.uniform(0, scale**2)), float(1 - rng.uniform(0, scale**2)))
                  for q in range(k))
    return NoisyOperation(Operation("x" if k == 1 else "cz", tuple(range(k))), "g", scipy.linalg.expm(-1j * h),
                          ham, pauli_rates=rates, depolarizing=float(rng.uniform(0, scale**2)), relaxation=relax)


def _cirq_process_fidelity(nop: NoisyOperation) -> float:
    """F_pro of the error channel (noisy.py order) written as cirq channels, on the Choi state."""
    k = len(nop.qubits)
    sys_q, anc = cirq.LineQubit.range(k), cirq.LineQubit.range(10, 10 + k)
    ops = [cirq.H.on_each(*anc), *(cirq.CNOT(a, s) for a, s in zip(anc, sys_q))]
    ops.append(cirq.MatrixGate(nop.coherent).on(*sys_q))
    for label, p in nop.pauli_rates.items():  # one Pauli channel per label: ρ -> (1-p)ρ + p PρP
        ops.append(cirq.KrausChannel([np.sqrt(1 - p) * np.eye(2**k), np.sqrt(p) * pauli_matrix(label)]).on(*sys_q))
    lam = nop.depolarizing
    ops.append(cirq.depolarize(lam * (4**k - 1) / 4**k, n_qubits=k).on(*sys_q))  # cirq's p = λ(d²-1)/d²
    for r in nop.relaxation:
        ops.append(cirq.amplitude_damp(r.gamma).on(sys_q[r.qubit]))
        ops.append(cirq.phase_damp(1 - r.dephasing_factor**2).on(sys_q[r.qubit]))  # coherence × sqrt(1-γ_pd)
    rho = cirq.DensityMatrixSimulator(dtype=np.complex128).simulate(
        cirq.Circuit(ops), qubit_order=[*anc, *sys_q]).final_density_matrix
    phi = np.zeros(4**k, complex)
    for i in range(2**k):
        phi[i * 2**k + i] = 2 ** (-k / 2)
    return float(np.vdot(phi, rho @ phi).real)


@pytest.mark.parametrize("k", [1, 2])
def test_first_order_infidelity_of_the_terms_matches_cirq(k):
    rng = np.random.default_rng(20261202 + k)
    for _ in range(6):
        nop = _random_operation(rng, k, 3e-3)
        errors = operation_errors(nop)
        first = sum(h * h for h in hamiltonian(errors).values()) + stochastic_process(errors)
        exact = 1 - _cirq_process_fidelity(nop)
        assert first == pytest.approx(exact, rel=2e-3, abs=1e-12)


def test_terms_carry_support_kind_and_source():
    nop = _random_operation(np.random.default_rng(5), 2, 1e-2)
    terms = operation_errors(nop).terms()
    kinds = [t.kind for t in terms]
    # channel order (noisy.py): Hamiltonian, stochastic (Pauli rates, then depolarizing), relaxation
    assert kinds == sorted(kinds, key=[TermKind.HAMILTONIAN, TermKind.STOCHASTIC, TermKind.RELAXATION].index)
    assert kinds.count(TermKind.STOCHASTIC) == 1 + 15 and kinds.count(TermKind.RELAXATION) == 2
    assert all(t.source.family == "g" and t.source.site == (0, 1) and t.source.operation is nop for t in terms)
    assert {t.qubits for t in terms if t.kind is TermKind.RELAXATION} == {(0,), (1,)}
    r = Relaxation(4, 50.0, 1e-3, 0.999)
    (idle,) = idle_errors(r).terms()
    assert idle.source.family == "idle" and idle.qubits == (4,) and idle.source.operation is None
    assert idle.kind is TermKind.RELAXATION and idle.relaxation is r
    assert idle_errors(Relaxation(4, 0.0, 0.0, 1.0)) is None


def test_relaxation_twirl_and_jumps():
    """Design notes §6 check values (Tomita & Svore, PRA 90, 062320 (2014)): t = 50 ns,
    T1 = 100 µs, T2 = 80 µs give p_x = 1.2496875520767725e-4, p_z = 1.8743360888417993e-4."""
    t1, t2, t = 100e3, 80e3, 50.0
    gamma = 1 - np.exp(-t / t1)
    c = np.exp(-t * (1 / t2 - 1 / (2 * t1)))
    errors = idle_errors(Relaxation(0, t, gamma, c))
    (term,) = errors.terms()
    rates = stochastic_rates(errors)
    assert rates["X"] == pytest.approx(1.2496875520767725e-4, rel=1e-12)
    assert rates["Z"] == pytest.approx(1.8743360888417993e-4, rel=1e-12)
    # jumps: σ- at γ and Z at (1-c)/2; the Lindblad step reproduces cirq's channels to first order
    rho = np.array([[0.3, 0.2 - 0.1j], [0.2 + 0.1j, 0.7]])
    lind = rho + sum(p * (m @ rho @ m.conj().T - 0.5 * (m.conj().T @ m @ rho + rho @ m.conj().T @ m))
                     for m, p in relaxation_jumps(term.relaxation))
    exact = rho
    for ch in (cirq.amplitude_damp(gamma), cirq.phase_damp(1 - c**2)):
        exact = sum(k @ exact @ k.conj().T for k in cirq.kraus(ch))
    assert np.max(np.abs(lind - exact)) < 10 * gamma**2 + 1e-12


def test_jump_operators_embed_a_one_qubit_term_in_its_site():
    r = Relaxation(1, 10.0, 1e-3, 1.0)
    nop = NoisyOperation(Operation("cz", (0, 1)), "cz", np.eye(4), {}, relaxation=(r,))
    (m, p), = jump_operators(operation_errors(nop))
    sigma_minus = np.array([[0, 1], [0, 0]])
    assert p == 1e-3 and np.array_equal(m, np.kron(np.eye(2), sigma_minus))  # second qubit, least significant
