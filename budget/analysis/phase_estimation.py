"""Amplified phase estimation: how many shots, at which depth, to measure one knob to a given σ.

The experiment: repeat the gate n times so a knob δ turns into a phase φ = n·a·δ (a = phase per
repetition per radian of the knob) and read it with Ramsey-type quadratures. Incoherent error
shrinks the fringe: visibility V = e^{-nΓ}, Γ the decay per repetition.

Cramér-Rao: one shot at the fringe's steepest point carries Fisher information (n a)² V² about δ,
so Var(δ̂) >= e^{2nΓ} / (m n² a²). Minimising over n gives n* = 1/Γ and Var_min = e² Γ² / (m a²)
(robust phase estimation with a depth ladder 1, 2, 4, …: Kimmel, Low, Yoder, PRA 92, 062315 (2015)).

Without knowing φ in advance the fringe is read in two quadratures, cos and sin, half the shots
each, and φ̂ = atan2(ŷ, x̂). By the delta method its variance is
(2 / (m V²)) (1 - 2 V² sin²φ cos²φ) / (n a)²: between one and two times the bound, twice at low
visibility. The planner counts shots for this estimator (the factor 2, the worst over φ).

Γ from the error model: the incoherent part of one repetition is replaced by the depolarizing
channel of the same process fidelity F (what a twirl or a randomised benchmark sees), whose
polarization p = (d² F - 1)/(d² - 1) multiplies every Bloch-vector component: Γ = -ln p
(Magesan, Gambetta, Emerson, PRL 106, 180504 (2011) for p and F).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from budget.errors.noisy import NoisyCircuit, NoisyOperation
from budget.errors.fidelity import operation_process_fidelity
from budget.pauli_algebra import pauli_sum

QUADRATURE_FACTOR = 2.0
"""Shots of the two-quadrature estimator relative to the Cramér-Rao bound (the worst over φ)."""


def variance_bound(depth: int, gamma_per_rep: float, shots: float) -> float:
    """Cramér-Rao bound e^{2nΓ}/(m n²) on the variance of the per-repetition phase (rad²).

    >>> f"{variance_bound(1000, 1e-3, 1000):.6e}"
    '7.389056e-09'
    """
    if depth < 1 or shots <= 0 or gamma_per_rep < 0:
        raise ValueError(f"depth {depth}, shots {shots}, Γ {gamma_per_rep}: need depth >= 1, shots > 0, Γ >= 0")
    return math.exp(2 * depth * gamma_per_rep) / (shots * depth**2)


def minimum_variance(gamma_per_rep: float, shots: float) -> float:
    """e² Γ² / m, the bound at the optimal depth n* = 1/Γ (Γ > 0).

    >>> f"{minimum_variance(1e-3, 1000):.6e}"
    '7.389056e-09'
    """
    if gamma_per_rep <= 0 or shots <= 0:
        raise ValueError(f"Γ {gamma_per_rep}, shots {shots}: both must be positive")
    return math.e**2 * gamma_per_rep**2 / shots


def optimal_depth(gamma_per_rep: float, *, max_depth: int = 10_000) -> int:
    """The whole depth n >= 1 that minimises e^{2nΓ}/n² (n* = 1/Γ), at most ``max_depth``.

    Without decay (Γ = 0) deeper is always better and the cap applies.

    >>> optimal_depth(1e-3), optimal_depth(0.0, max_depth=500), optimal_depth(3.0)
    (1000, 500, 1)
    """
    if gamma_per_rep < 0 or not math.isfinite(gamma_per_rep):
        raise ValueError(f"Γ = {gamma_per_rep}: the decay per repetition must be a finite number >= 0")
    if gamma_per_rep == 0 or 1 / gamma_per_rep >= max_depth:
        return int(max_depth)
    low = max(1, math.floor(1 / gamma_per_rep))
    return min((low, low + 1), key=lambda n: 2 * n * gamma_per_rep - 2 * math.log(n))


def two_quadrature_variance(depth: int, gamma_per_rep: float, shots: float, phase_rad: float) -> float:
    """Delta-method variance of φ̂/n with φ̂ = atan2(ŷ, x̂), shots split between the quadratures.

    (2 / (m V²)) (1 - 2 V² sin²φ cos²φ) / n², V = e^{-nΓ}, φ the accumulated phase at depth n.
    """
    v2 = math.exp(-2 * depth * gamma_per_rep)
    s, c = math.sin(phase_rad), math.cos(phase_rad)
    return 2 / (shots * v2) * (1 - 2 * v2 * s * s * c * c) / depth**2


def shots_needed(sigma_rad: float, depth: int, gamma_per_rep: float, phase_per_rad: float) -> int:
    """Shots at ``depth`` (both quadratures together, an even number) for std(δ̂) <= ``sigma_rad``.

    m = 2 e^{2nΓ} / (n² a² σ²) (the two-quadrature estimator, worst over φ), rounded up.
    """
    if sigma_rad <= 0 or phase_per_rad <= 0:
        raise ValueError(f"σ = {sigma_rad} rad, a = {phase_per_rad}: both must be positive")
    m = QUADRATURE_FACTOR * math.exp(2 * depth * gamma_per_rep) / (depth * phase_per_rad * sigma_rad) ** 2
    return 2 * math.ceil(m / 2 * (1 - 1e-12))


def final_depth(
    sigma_rad: float, gamma_per_rep: float, phase_per_rad: float, *, max_depth: int = 10_000, min_shots: int = 200
) -> tuple[int, int]:
    """(depth, shots) of the last step of the ladder for std(δ̂) <= ``sigma_rad``.

    Normally n* = 1/Γ with :func:`shots_needed`. When that needs fewer than ``min_shots`` (a loose
    tolerance), stop instead at the shallowest depth that reaches σ with ``min_shots``: fewer
    repetitions, and a phase noise per step small enough to keep the 2π branch.

    >>> final_depth(1e-5, 1e-3, 1.0), final_depth(1e-3, 1e-3, 1.0)
    ((1000, 147782), (112, 200))
    """
    n = optimal_depth(gamma_per_rep, max_depth=max_depth)
    if shots_needed(sigma_rad, n, gamma_per_rep, phase_per_rad) >= min_shots:
        return n, shots_needed(sigma_rad, n, gamma_per_rep, phase_per_rad)
    low, high = 1, n  # e^{2nΓ}/n² falls for n < 1/Γ: bisect for the first depth that suffices
    while low < high:
        mid = (low + high) // 2
        if shots_needed(sigma_rad, mid, gamma_per_rep, phase_per_rad) <= min_shots:
            high = mid
        else:
            low = mid + 1
    return low, 2 * math.ceil(min_shots / 2)


def decay_per_repetition(nop: NoisyOperation) -> float:
    """Γ of repeating this operation: -ln p, p the polarization of its incoherent part.

    The incoherent part is the operation's channel with the coherent unitary removed (stochastic
    Pauli rates, depolarizing, T1/T2 during the gate); F is its process fidelity, exact from the
    Kraus operators, and p = (d² F - 1)/(d² - 1).
    """
    d = 2 ** len(nop.qubits)
    bare = dataclasses.replace(nop, coherent=np.eye(d, dtype=complex), hamiltonian={})
    p = (d * d * operation_process_fidelity(bare) - 1) / (d * d - 1)
    if p <= 0:
        return math.inf
    return max(0.0, -math.log(p))


def phase_per_radian(nop: NoisyOperation, knob: str) -> float:
    """a: phase gained per repetition per radian of ``knob`` when the gate is simply repeated.

    Repeating G e^{-iδK} n times gives G^n e^{-i n δ K_c} plus terms that stay bounded in n, with
    K_c the part of K that commutes with G (the elements of K between eigenvectors of G with equal
    eigenvalues; the eigenbasis from a complex Schur form, unitary even when eigenvalues repeat).
    The best probe state is an equal superposition of K_c's extreme eigenvectors, whose relative
    phase grows by a·δ per repetition with a = λ_max(K_c) - λ_min(K_c). a = 0 means repetition
    alone does not amplify the knob (e.g. an axis error on a π pulse is echoed away).
    """
    generator = nop.knob_generators.get(knob)
    if generator is None:
        raise KeyError(f"operation {nop.op.gate} on {nop.qubits} has no knob {knob!r}")
    k = pauli_sum(generator, len(nop.qubits))
    t, q = scipy.linalg.schur(np.asarray(nop.op.unitary(), dtype=complex), output="complex")
    eig = np.diag(t)
    same = np.abs(eig[:, None] - eig[None, :]) < 1e-9
    kc = np.where(same, q.conj().T @ k @ q, 0.0)
    w = np.linalg.eigvalsh((kc + kc.conj().T) / 2)
    gap = float(w[-1] - w[0])
    return gap if gap > 1e-12 else 0.0


@dataclass(frozen=True)
class Probe:
    """One site where a knob can be measured: the family's gate on these qubits."""

    qubits: tuple[str, ...]
    gamma_per_rep: float
    phase_per_rad: float
    duration_ns: float


def find_probes(circuit: NoisyCircuit) -> dict[tuple[str, str], tuple[Probe, ...]]:
    """(family, knob) -> one probe per distinct qubit tuple of the family (first operation there)."""
    out: dict[tuple[str, str], dict[tuple[int, ...], Probe]] = {}
    for layer in circuit.distinct_layers():
        for nop in layer.sites:
            for knob in nop.knob_generators:
                sites = out.setdefault((nop.family, knob), {})
                if nop.qubits not in sites:
                    sites[nop.qubits] = Probe(
                        tuple(circuit.qubits[q] for q in nop.qubits), decay_per_repetition(nop),
                        phase_per_radian(nop, knob), float(nop.duration_ns),
                    )
    return {label: tuple(sites.values()) for label, sites in out.items()}
