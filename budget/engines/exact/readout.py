"""Reading the results out of the exact engine's final register: the two metrics and Pauli
expectation values.

For input |0…0> and ideal output ψ:

    state vector:   F = |<ψ|ψ_actual>|²
    unitary:        F_pro = |Tr(U_ideal† U)|²/d²
    density matrix: F = <ψ|ρ|ψ>
    superoperator:  F_pro = Tr(S_ideal† S)/d² = Tr(R_idealᵀ R)/d²

The superoperator S (interleaved (row, column) basis) equals (1/d²)·Σ_k |Tr(U† K_k)|² in F_pro
(Nielsen, Phys. Lett. A 303, 249 (2002)); the register holds it as the real Pauli transfer matrix
R = T S T† with T unitary (budget/engines/exact/local.py), and the trace Tr(A† B) is invariant
under a unitary change of basis, so F_pro is read in the Pauli basis directly, with R_ideal the
ideal circuit's transfer matrix (real, so R_ideal† = R_idealᵀ). Only vectors (a density matrix,
one column of an operator) go back to the interleaved basis, with T† per qubit.
"""

from __future__ import annotations

import numpy as np

from budget.engines.exact.local import PAULI_BASIS
from budget.pauli_algebra import pauli_matrix


def on_sites(data: np.ndarray, mats: list[np.ndarray | None]) -> np.ndarray:
    """``data`` (any shape, 4^len(mats) entries) with mats[k] applied on its k-th 4-dimensional
    axis (None leaves it): one batched product per axis on a reshaped view, no transposes."""
    x = data
    for k, m in enumerate(mats):
        if m is not None:
            x = np.matmul(m, x.reshape(4**k, 4, -1))
    return x.reshape(data.shape)


def from_pauli(data: np.ndarray, n: int) -> np.ndarray:
    """(4^n, C) register in the Pauli basis -> interleaved (r, c) basis on the output side, and on
    the input side too when C = 4^n (an operator): S = T† R T per qubit."""
    tinv = PAULI_BASIS.conj().T
    mats = [tinv] * n + ([PAULI_BASIS.T] * n if data.shape[1] == 4**n else [None])
    return on_sites(data.astype(complex), mats)


def unitary_ptm(u: np.ndarray, n: int) -> np.ndarray:
    """The real Pauli transfer matrix R = T (U ⊗ conj U) T† of an n-qubit unitary (gate order),
    with (U ⊗ conj U) in the interleaved basis, as the register holds it."""
    d = 2**n
    s = np.multiply.outer(u, u.conj()).reshape((2,) * (4 * n))  # (r…, r'…, c…, c'…)
    perm = [a for q in range(n) for a in (q, 2 * n + q)] + [a for q in range(n) for a in (n + q, 3 * n + q)]
    s = s.transpose(perm).reshape(d * d, d * d)
    return np.ascontiguousarray(on_sites(s, [PAULI_BASIS] * n + [PAULI_BASIS.conj()] * n).real)


def process_infidelity(r_ideal: np.ndarray, r: np.ndarray, n: int) -> float:
    """1 - Tr(R_idealᵀ R)/d² for Pauli transfer matrices (module docstring)."""
    return 1.0 - float(np.vdot(r_ideal, r)) / 4**n


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
    raise ValueError(f"form {form!r}: the superoperator is read by process_infidelity")
