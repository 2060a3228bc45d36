"""Local matrices of the exact engine: one matrix per site of a layer's normal form, in the
register's form.

A layer's sites (:func:`budget.errors.normal_form.layer_errors`) are its operations' own errors
(site i right after the ideal gate of operation i, fused with it), the idle qubits' relaxation and
the layer's context errors, in channel order; the engine applies them one after the other and
knows nothing else about them.

Unitary form (state vectors, unitaries): U_coh · U_ideal, 2^k x 2^k in gate order, with U_coh the
site's exact coherent unitary (``SiteErrors.unitary``); sites without one (relaxation only) are
not applied (this form runs only when no site has an incoherent part).

Channel form (density matrices, superoperators): the site's whole channel as one
4^k x 4^k superoperator in the *interleaved* site order (r_1 c_1 r_2 c_2 …, see
:mod:`budget.engines.exact.register`). With row-major vec(ρ), vec(A ρ B) = (A ⊗ Bᵀ) vec(ρ), so

    unitary U:        U ⊗ conj(U)
    Pauli channel:    (1 - Σ p_P) 1 + Σ p_P P ⊗ conj(P)   (each group of ``SiteErrors.stochastic``:
                      the Pauli rates, then depolarizing λ as every P ≠ I at λ/d², which is
                      (1 - λ) 1 + (λ/d) vec(1) vec(1)ᵀ, ρ -> (1-λ) ρ + λ Tr(ρ) 1/d)
    relaxation:       Σ_K K ⊗ conj(K) per qubit, K from Relaxation.kraus()

composed in the order of budget/errors/noisy.py: ideal gate, coherent unitary, Pauli channels,
relaxation of each qubit.

The register keeps density matrices in the normalised Pauli basis {1, X, Y, Z}/√2 per qubit
(coefficients Tr(P ρ)/√2 per qubit, real), where every channel is a *real* matrix, the Pauli
transfer matrix R = T S T† (T unitary, :data:`PAULI_BASIS`): real products cost a quarter of
complex ones and half the memory (PTM: e.g. Greenbaum, "Introduction to quantum gate set
tomography", arXiv:1509.02921 (2015)).
"""

from __future__ import annotations

from functools import reduce

import numpy as np

from budget.circuit.ir import Operation
from budget.errors.noisy import Relaxation
from budget.errors.normal_form import SiteErrors
from budget.pauli_algebra import pauli_matrix

PAULI_BASIS = np.array([pauli_matrix(p).conj().reshape(-1) for p in "IXYZ"]) / np.sqrt(2)
"""T with T[P, 2r + c] = conj(P[r, c])/√2: (r, c) coefficients of one qubit -> Pauli coefficients."""


def pauli_transfer(superop: np.ndarray, k: int) -> np.ndarray:
    """The real Pauli transfer matrix T_k S T_k† of an interleaved k-qubit superoperator."""
    t = reduce(np.kron, [PAULI_BASIS] * k)
    return np.ascontiguousarray((t @ superop @ t.conj().T).real)


def site_unitary(errors: SiteErrors, gate: Operation | None, *, ideal: bool) -> np.ndarray | None:
    """U_ideal (``ideal=True``) or U_coh · U_ideal of one site, gate order (U_ideal the identity
    without ``gate``, U_coh without ``errors.unitary``); None when both are the identity."""
    u = None if gate is None else np.asarray(gate.unitary(), dtype=complex)
    if ideal or errors.unitary is None:
        return u
    coh = np.asarray(errors.unitary, dtype=complex)
    return coh if u is None else coh @ u


def to_interleaved(superop: np.ndarray, k: int) -> np.ndarray:
    """A k-qubit superoperator from the (rows…, columns…) order of row-major vec(ρ) to the
    interleaved per-qubit order (r_1 c_1 r_2 c_2 …), on both its output and input side."""
    if k == 1:
        return superop
    perm = [i for q in range(k) for i in (q, k + q)]
    full = perm + [2 * k + p for p in perm]
    return superop.reshape((2,) * (4 * k)).transpose(full).reshape(4**k, 4**k)


def relaxation_superop(relax: Relaxation) -> np.ndarray:
    """Σ_K K ⊗ conj(K) of amplitude damping then pure dephasing on one qubit (4 x 4)."""
    return sum(np.kron(k, k.conj()) for k in relax.kraus())


def site_channel(errors: SiteErrors, gate: Operation | None) -> np.ndarray:
    """The whole channel of one site after its ideal gate (if any), 4^k x 4^k in interleaved order."""
    k = len(errors.qubits)
    d = 2**k
    u = site_unitary(errors, gate, ideal=False)
    s = np.eye(d * d, dtype=complex) if u is None else np.kron(u, u.conj())
    start = 0
    for size in errors.groups or ((len(errors.stochastic),) if errors.stochastic else ()):
        part = errors.stochastic[start:start + size]
        start += size
        pauli = (1.0 - sum(p for _, p in part)) * np.eye(d * d, dtype=complex)
        for label, p in part:
            m = pauli_matrix(label)
            pauli = pauli + p * np.kron(m, m.conj())
        s = pauli @ s
    s = to_interleaved(s, k)
    relax = {r.qubit: r for r in errors.relaxation if not r.is_trivial}
    if relax:
        eye4 = np.eye(4, dtype=complex)
        parts = [relaxation_superop(relax[q]) if q in relax else eye4 for q in errors.qubits]
        s = reduce(np.kron, parts) @ s
    return s
