"""Reading the results out of the exact engine's final register: the two metrics and Pauli
expectation values.

Density matrices and superoperators come out of the register in the normalised Pauli basis
(budget/engines/exact/local.py) and go back to the interleaved (row, column) basis with
T† per qubit. Then, for input |0…0> and ideal output ψ:

    state vector:   F = |<ψ|ψ_actual>|²
    unitary:        F_pro = |Tr(U_ideal† U)|²/d²
    density matrix: F = <ψ|ρ|ψ>
    superoperator:  F_pro = Tr(S_ideal† S)/d² = (1/d²) Σ conj(U_ij) U_kl S_(ik),(jl)
                    (row-major vec; equals (1/d²) Σ_k |Tr(U† K_k)|², Nielsen, Phys. Lett. A 303,
                    249 (2002))
"""

from __future__ import annotations

import numpy as np

from budget.engines.exact.local import PAULI_BASIS
from budget.pauli_algebra import pauli_matrix


def from_pauli(data: np.ndarray, n: int) -> np.ndarray:
    """(4^n, C) register in the Pauli basis -> interleaved (r, c) basis on the output side, and on
    the input side too when C = 4^n (an operator): S = T† R T per qubit."""
    out = data.astype(complex).reshape((4,) * n + (data.shape[1],))
    tinv = PAULI_BASIS.conj().T
    for q in range(n):
        out = np.moveaxis(np.tensordot(tinv, out, axes=(1, q)), 0, q)
    if data.shape[1] == 4**n:
        out = out.reshape((4,) * (2 * n))
        for q in range(n):
            out = np.tensordot(out, PAULI_BASIS, axes=(n + q, 0))
            out = np.moveaxis(out, -1, n + q)
    return np.ascontiguousarray(out).reshape(4**n, data.shape[1])


def _interleaved_to_matrix(rho: np.ndarray, n: int) -> np.ndarray:
    """Density matrix d x d from the interleaved layout (site index 2 r_q + c_q)."""
    perm = [2 * q for q in range(n)] + [2 * q + 1 for q in range(n)]
    return rho.reshape((2,) * (2 * n)).transpose(perm).reshape(2**n, 2**n)


def expectation(state: np.ndarray, paulis: dict[int, str], n: int, density: bool) -> float:
    """<O> for a Pauli product O on a state vector or an interleaved density matrix."""
    if density:
        val = state.reshape((4,) * n)
        for q in range(n):  # contract the leading axis each time: Tr(Oρ) = Σ_rc O[c, r] ρ[r, c]
            o = pauli_matrix(paulis.get(q, "I")).T.reshape(4)
            val = np.tensordot(o, val, axes=(0, 0))
        return float(np.real(val))
    phi = state.reshape((2,) * n)
    for q, letter in paulis.items():
        phi = np.moveaxis(np.tensordot(pauli_matrix(letter), phi, axes=(1, q)), 0, q)
    return float(np.real(np.vdot(state, phi.reshape(-1))))


def infidelity(form: str, actual: np.ndarray, ideal: np.ndarray, n: int) -> float:
    d = 2**n
    if form == "vector":
        return 1.0 - abs(np.vdot(ideal[:, 0], actual[:, 0])) ** 2
    if form == "unitary":
        return 1.0 - abs(np.vdot(ideal, actual)) ** 2 / d**2
    if form == "density":
        psi = ideal[:, 0]
        rho = _interleaved_to_matrix(actual[:, 0], n)
        return 1.0 - float(np.real(np.vdot(psi, rho @ psi)))
    # superop: S[(i k), (j l)] in row-major vec order; Tr(S_U† S) = Σ conj(U_ij) U_kl S_ikjl
    perm = [2 * q for q in range(n)] + [2 * q + 1 for q in range(n)]
    full = perm + [2 * n + p for p in perm]
    s = actual.reshape((2,) * (4 * n)).transpose(full).reshape(d, d, d, d)
    return 1.0 - float(np.real(np.einsum("ij,kl,ikjl->", ideal.conj(), ideal, s, optimize=True))) / d**2
