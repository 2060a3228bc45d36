"""Pauli algebra: labels, matrices, products with phases, commutation, expansion, twirls, Clifford tableaus.

The one place the project defines the Pauli group; everything else imports it.

Conventions. A label such as ``"XZ"`` means X on the first qubit and Z on the second; matrices are in
gate order with the first qubit most significant (cirq's convention). Labels on n qubits are listed
in the order of ``itertools.product("IXYZ", repeat=n)``, identity first.

Bit form. A Pauli is also written (x, z, e): the operator i^e X^x Z^z with every X factor before
every Z factor. A Hermitian label has e = |x ∧ z| (mod 4) (Y = i X Z). Products follow from
Z X = -X Z (Aaronson & Gottesman, "Improved simulation of stabilizer circuits", Phys. Rev. A 70,
052328 (2004)):

    (i^e1 X^x1 Z^z1)(i^e2 X^x2 Z^z2) = i^(e1 + e2 + 2 |z1 ∧ x2|) X^(x1⊕x2) Z^(z1⊕z2),

and two Paulis commute exactly when |x1 ∧ z2| + |z1 ∧ x2| is even. :func:`row_product` applies the
rule to packed rows (uint64 words of 64 qubits); :func:`multiply` to labels, through the same code.

Expansion. Any d x d matrix M = Σ_P c_P P with c_P = Tr(P M)/d (the Paulis are an orthogonal basis
under the Hilbert–Schmidt product, Tr(P Q) = d δ_PQ). The Pauli twirl of a channel with Kraus
operators K keeps p_P = Σ_K |c_P(K)|² (Wallman & Emerson, "Noise tailoring for scalable quantum
computation via randomized compiling", Phys. Rev. A 94, 052325 (2016)).
"""

from __future__ import annotations

import itertools
from functools import lru_cache
from typing import Callable, Iterable, Mapping

import numpy as np
import scipy.linalg

LETTERS = "IXYZ"
"""The one-qubit Paulis in label order."""


def _frozen(m: np.ndarray) -> np.ndarray:
    m = np.asarray(m, dtype=complex)
    m.setflags(write=False)
    return m


I = _frozen(np.eye(2))
X = _frozen([[0, 1], [1, 0]])
Y = _frozen([[0, -1j], [1j, 0]])
Z = _frozen(np.diag([1.0, -1.0]))
ONE_QUBIT = {"I": I, "X": X, "Y": Y, "Z": Z}
"""Letter -> 2x2 matrix (read-only)."""

LocalPauli = tuple[tuple[int, ...], tuple[int, ...], int]
"""(x bits, z bits, e) meaning i^e X^x Z^z, qubits in gate order."""

# _TO_PAULI[p, 2*i + j] = P_p[j, i], so Tr(P M) = Σ_ij P[j, i] M[i, j] is one contraction per qubit.
_TO_PAULI = np.array([m.T.reshape(4) for m in ONE_QUBIT.values()])


@lru_cache(maxsize=None)
def pauli_labels(n: int) -> tuple[str, ...]:
    """All 4**n Pauli labels on n qubits, ``"I…I"`` first, letters in the order I, X, Y, Z.

    >>> pauli_labels(1)
    ('I', 'X', 'Y', 'Z')
    """
    return tuple("".join(p) for p in itertools.product(LETTERS, repeat=n))


@lru_cache(maxsize=4096)
def pauli_matrix(label: str) -> np.ndarray:
    """The matrix of a Pauli label (read-only), first letter on the most significant qubit.

    >>> pauli_matrix("XZ").real.astype(int).tolist()[0]
    [0, 0, 1, 0]
    """
    if not label or set(label) - set(LETTERS):
        raise ValueError(f"Pauli label {label!r}: expected a non-empty string of the letters I, X, Y, Z")
    m = np.ones((1, 1), dtype=complex)
    for ch in label:
        m = np.kron(m, ONE_QUBIT[ch])
    return _frozen(m)


def pauli_sum(terms: Mapping[str, complex] | Iterable[tuple[str, complex]], num_qubits: int | None = None) -> np.ndarray:
    """Σ h_P P as a matrix (gate order) from a dict or (label, h) pairs; ``num_qubits`` sizes an
    empty sum.

    >>> pauli_sum({"Z": 0.5}).real.tolist()
    [[0.5, 0.0], [0.0, -0.5]]
    """
    items = list(terms.items()) if isinstance(terms, Mapping) else list(terms)
    k = len(items[0][0]) if items else num_qubits
    if k is None:
        raise ValueError("pauli_sum: an empty sum needs num_qubits")
    out = np.zeros((2**k, 2**k), dtype=complex)
    for label, h in items:
        out += h * pauli_matrix(label)
    return out


def pauli_unitary(terms: Mapping[str, float] | Iterable[tuple[str, float]]) -> np.ndarray:
    """exp(-i Σ h_P P) through an eigendecomposition of the Hermitian sum.

    >>> bool(np.allclose(pauli_unitary({"X": np.pi / 2}), -1j * X))
    True
    """
    w, v = np.linalg.eigh(pauli_sum(terms))
    return (v * np.exp(-1j * w)) @ v.conj().T


def pauli_coefficients(matrices: np.ndarray) -> np.ndarray:
    """c_P = Tr(P M)/d for a stack of matrices (..., d, d), d = 2**n: shape (..., 4**n), labels in
    :func:`pauli_labels` order."""
    m = np.asarray(matrices, dtype=complex)
    d = m.shape[-1]
    n = d.bit_length() - 1
    if m.ndim < 2 or m.shape[-2] != d or d != 2**n or n < 1:
        raise ValueError(f"matrix of shape {m.shape}: expected a square matrix of side 2**n, n >= 1")
    batch = m.shape[:-2]
    t = m.reshape((-1,) + (2,) * (2 * n))
    t = t.transpose([0] + [1 + k for q in range(n) for k in (q, n + q)]).reshape((-1,) + (4,) * n)
    for axis in range(1, n + 1):
        t = np.moveaxis(np.tensordot(_TO_PAULI, t, axes=([1], [axis])), 0, axis)
    return t.reshape(batch + (4**n,)) / d


def pauli_decompose(matrix: np.ndarray, *, tol: float | None = None) -> dict[str, complex]:
    """Coefficients c_P with matrix = Σ_P c_P P, c_P = Tr(P M)/d.

    Args:
        matrix: a d x d matrix, d = 2**n.
        tol: when given, labels with |c_P| <= tol are left out; by default all 4**n labels appear.

    >>> pauli_decompose(np.diag([1.0, 0.0]))
    {'I': (0.5+0j), 'X': 0j, 'Y': 0j, 'Z': (0.5+0j)}
    """
    coeffs = pauli_coefficients(matrix)
    n = (coeffs.shape[-1].bit_length() - 1) // 2
    return {label: complex(c) for label, c in zip(pauli_labels(n), coeffs) if tol is None or abs(c) > tol}


def pauli_hamiltonian(unitary: np.ndarray, *, tol: float = 1e-15) -> dict[str, float]:
    """H = Σ h_P P with unitary = exp(-i H) up to global phase; identity label left out.

    The global phase arg Tr U is removed first, then the principal logarithm is taken through a
    complex Schur decomposition (unitary, so the Schur form is diagonal and the basis stays unitary
    for degenerate eigenvalues). Exact for any error whose eigenphases spread less than π.
    Labels with |h_P| < tol are dropped.

    >>> h = pauli_hamiltonian(scipy.linalg.expm(-0.01j * pauli_matrix("X")))
    >>> list(h), round(h["X"], 12)
    (['X'], 0.01)
    """
    u = np.asarray(unitary, dtype=complex)
    tr = np.trace(u)
    if abs(tr) > 1e-12:
        u = u * (tr.conjugate() / abs(tr))
    t, q = scipy.linalg.schur(u, output="complex")
    h = -(q * np.angle(np.diag(t))) @ q.conj().T
    return {label: float(c.real) for label, c in pauli_decompose(h).items()
            if set(label) != {"I"} and abs(c.real) >= tol}


def channel_twirl(kraus: Iterable[np.ndarray]) -> dict[str, float]:
    """p_P = Σ_K |Tr(P K)/d|² of the Pauli-twirled channel, every non-identity label.

    >>> channel_twirl([np.sqrt(0.9) * I, np.sqrt(0.1) * X])["X"]
    0.1
    """
    coeffs = pauli_coefficients(np.asarray(list(kraus)))
    probs = np.sum(np.abs(coeffs) ** 2, axis=0)
    n = (probs.shape[-1].bit_length() - 1) // 2
    return {label: float(p) for label, p in zip(pauli_labels(n)[1:], probs[1:])}


def twirl_probabilities(unitary: np.ndarray) -> dict[str, float]:
    """Pauli probabilities p_P = |Tr(P U)/d|² of a twirled unitary channel (identity excluded; only
    labels with p_P > 1e-300).

    >>> p = twirl_probabilities(np.array([[np.cos(0.05), -1j*np.sin(0.05)], [-1j*np.sin(0.05), np.cos(0.05)]]))
    >>> bool(abs(p["X"] - np.sin(0.05)**2) < 1e-15)
    True
    """
    return {label: p for label, p in channel_twirl([unitary]).items() if p > 1e-300}


def transfer_matrix(superop: Callable[[np.ndarray], np.ndarray], basis: np.ndarray) -> np.ndarray:
    """Pauli transfer matrix M[w, v] = Re Tr(P_w S(P_v)) / d of a Hermiticity-preserving map S,
    given as a function on matrices, in the order of ``basis`` (a stack of Pauli matrices).

    Raises:
        ValueError: S does not preserve Hermiticity (imaginary entries above 1e-10).
    """
    images = np.array([superop(p) for p in basis])
    m = np.einsum("wij,vji->wv", basis, images) / basis.shape[-1]
    if np.max(np.abs(m.imag), initial=0.0) > 1e-10:
        raise ValueError("local map does not preserve Hermiticity (internal error)")
    return np.ascontiguousarray(m.real)


# ---- bit form, products and commutation -----------------------------------------------------------

def label_bits(label: str) -> LocalPauli:
    """The (x, z, e) form of a Hermitian Pauli label.

    >>> label_bits("XY")
    ((1, 1), (0, 1), 1)
    """
    x = tuple(int(c in "XY") for c in label)
    z = tuple(int(c in "YZ") for c in label)
    return x, z, label.count("Y") % 4


def popcount(a: np.ndarray) -> np.ndarray:
    """Number of set bits along the last axis (of uint64 words)."""
    return np.bitwise_count(a).sum(axis=-1, dtype=np.int64)


def row_product(
    a: tuple[np.ndarray, np.ndarray, np.ndarray], b: tuple[np.ndarray, np.ndarray, np.ndarray]
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Row-wise product a·b of packed Pauli rows (x, z, e), broadcasting over leading axes
    (module docstring)."""
    xa, za, ea = a
    xb, zb, eb = b
    e = (ea.astype(np.int64) + eb + 2 * popcount(za & xb)) & 3
    return xa ^ xb, za ^ zb, e.astype(np.uint8)


def hermitian_sign(x: np.ndarray, z: np.ndarray, e: np.ndarray) -> np.ndarray:
    """±1: the sign s with i^e X^x Z^z = s · (the Hermitian Pauli with those bits)."""
    d = (e.astype(np.int64) - popcount(x & z)) & 3
    if np.any(d & 1):
        raise ValueError("a Pauli row is not Hermitian (internal error)")
    return 1 - d  # d is 0 or 2


_CODE_LETTERS = "IXZY"
"""Letter of the one-qubit code x + 2z."""


def _packed(label: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    x, z, e = label_bits(label)
    pack = lambda bits: np.packbits(np.array(bits + (0,) * (-len(bits) % 64), dtype=np.uint8), bitorder="little").view(np.uint64)  # noqa: E731
    return pack(x), pack(z), np.array(e, dtype=np.uint8)


def multiply(a: str, b: str) -> tuple[complex, str]:
    """(phase, label) with P_a P_b = phase · P_label, phase in {1, i, -1, -i}.

    >>> multiply("X", "Y"), multiply("ZZ", "XX")
    ((1j, 'Z'), ((-1+0j), 'YY'))
    """
    if len(a) != len(b):
        raise ValueError(f"Pauli labels {a!r} and {b!r} act on different numbers of qubits")
    x, z, e = row_product(_packed(a), _packed(b))
    bits_x = np.unpackbits(x.view(np.uint8), bitorder="little")[: len(a)]
    bits_z = np.unpackbits(z.view(np.uint8), bitorder="little")[: len(a)]
    label = "".join(_CODE_LETTERS[bx + 2 * bz] for bx, bz in zip(bits_x, bits_z))
    return complex(1j ** ((int(e) - label.count("Y")) % 4)), label


def commutes(a: str, b: str) -> bool:
    """True when the Paulis commute: |x_a ∧ z_b| + |z_a ∧ x_b| is even.

    >>> commutes("XX", "ZZ"), commutes("X", "Z")
    (True, False)
    """
    if len(a) != len(b):
        raise ValueError(f"Pauli labels {a!r} and {b!r} act on different numbers of qubits")
    xa, za, _ = _packed(a)
    xb, zb, _ = _packed(b)
    return int(popcount(xa & zb) + popcount(za & xb)) % 2 == 0

