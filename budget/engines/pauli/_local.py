"""Local linear maps on the Pauli basis of one or two qubits (Pauli transfer matrices).

Local basis. A qubit's Pauli is coded c = x + 2 z (I = 0, X = 1, Z = 2, Y = 3: the packed-bit
convention of :mod:`budget.engines.frame.pauli_frame`, Y = X and Z bits both set, taken Hermitian). A
site of k ≤ 2 qubits (gate order a, b) has local index v = c_a + 4 c_b, 4^k values.

A linear map M on operators is kept as its real matrix in that basis,
M[w, v] = Tr(P_w M(P_v)) / d (real for Hermiticity-preserving maps):

- conjugation by a gate U (``"pull"``: P -> U† P U, ``"push"``: P -> U P U†) gives the Pauli
  transfer matrix, orthogonal, and a signed permutation exactly when U is Clifford;
- the first-order Heisenberg generator of an operation's error, O -> i[H, O] + Σ_L p (L† O L -
  ½{L†L, O}) for its Hamiltonian H = Σ h_P P and its jump operators L at probability p
  (Blume-Kohout et al., "A taxonomy of small Markovian errors", PRX Quantum 3, 020335 (2022)).

Maps are computed once per distinct gate (cached by gate name, angles and matrix bytes).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from budget.pauli_algebra import pauli_matrix
from budget.pauli_algebra import transfer_matrix as _transfer

LETTERS = "IXZY"
"""Letter of each one-qubit code c = x + 2z."""


@lru_cache(maxsize=4)
def local_basis(k: int) -> np.ndarray:
    """(4^k, d, d) Pauli matrices in local-index order (v = c_a + 4 c_b; first letter on qubit a)."""
    if k == 1:
        return np.array([pauli_matrix(c) for c in LETTERS])
    return np.array([pauli_matrix(LETTERS[v % 4] + LETTERS[v // 4]) for v in range(16)])


def local_label(label: str) -> int:
    """Local index of a Hermitian Pauli label in gate order, e.g. ``"XZ"`` -> 1 + 4·2 = 9."""
    return sum(LETTERS.index(ch) * 4**j for j, ch in enumerate(label))


def transfer_matrix(superop, k: int) -> np.ndarray:
    """M[w, v] = Re Tr(P_w superop(P_v)) / d for a map given as a Python function on matrices."""
    return _transfer(superop, local_basis(k))


@dataclass(frozen=True)
class LocalMap:
    """A local map in branch form, for sparse application.

    Attributes:
        matrix: M (4^k x 4^k).
        out_index: (4^k, B) local index of each branch of column v (0 where absent).
        out_value: (4^k, B) coefficient of each branch (0 where absent).
        clifford: every column has exactly one entry of magnitude 1 (a signed permutation).
    """

    matrix: np.ndarray
    out_index: np.ndarray
    out_value: np.ndarray
    clifford: bool

    @property
    def k(self) -> int:
        return 1 if self.matrix.shape[0] == 4 else 2


def branch_form(m: np.ndarray, tol: float = 1e-14) -> LocalMap:
    """Split each column of ``m`` into its non-zero entries (|entry| > tol)."""
    size = m.shape[0]
    nz = np.abs(m) > tol
    width = max(1, int(nz.sum(axis=0).max()))
    idx = np.zeros((size, width), np.uint8)
    val = np.zeros((size, width))
    for v in range(size):
        rows = np.nonzero(nz[:, v])[0]
        rows = rows[np.argsort(-np.abs(m[rows, v]), kind="stable")]
        idx[v, : len(rows)] = rows
        val[v, : len(rows)] = m[rows, v]
    clifford = bool(np.all(nz.sum(axis=0) == 1) and np.allclose(np.abs(m[nz]), 1.0, atol=1e-12))
    if clifford:
        val = np.round(val)
    return LocalMap(np.where(nz, m, 0.0), idx, val, clifford)


_GATE_MAPS: dict[tuple, LocalMap] = {}


def gate_map(unitary: np.ndarray, direction: str, key: tuple | None = None) -> LocalMap:
    """Pauli transfer matrix of conjugation by ``unitary`` (``"pull"``: U†PU, ``"push"``: UPU†),
    in branch form; cached by ``key`` (or the matrix bytes)."""
    cache_key = (key if key is not None else unitary.tobytes(), direction)
    hit = _GATE_MAPS.get(cache_key)
    if hit is None:
        u = np.asarray(unitary, dtype=complex)
        k = 1 if u.shape[0] == 2 else 2
        if direction == "pull":
            m = transfer_matrix(lambda p: u.conj().T @ p @ u, k)
        else:
            m = transfer_matrix(lambda p: u @ p @ u.conj().T, k)
        # snap entries that are zero or ±1 to rounding, so Clifford gates are recognised exactly
        m = np.where(np.abs(m) < 1e-12, 0.0, m)
        m = np.where(np.abs(np.abs(m) - 1) < 1e-12, np.sign(m), m)
        hit = _GATE_MAPS[cache_key] = branch_form(m)
    return hit


def generator_map(hamiltonian: dict[str, float], jumps: list[tuple[np.ndarray, float]], k: int) -> np.ndarray:
    """Matrix of O -> i[H, O] + Σ p (L† O L - ½{L†L, O}) on k qubits (Heisenberg picture, first
    order): H = Σ h_P P from Pauli labels, jumps as (L, p) pairs."""
    d = 2**k
    h = np.zeros((d, d), complex)
    for label, c in hamiltonian.items():
        h += c * pauli_matrix(label)

    def apply(o: np.ndarray) -> np.ndarray:
        out = 1j * (h @ o - o @ h)
        for lop, p in jumps:
            ldl = lop.conj().T @ lop
            out += p * (lop.conj().T @ o @ lop - 0.5 * (ldl @ o + o @ ldl))
        return out

    return transfer_matrix(apply, k)
