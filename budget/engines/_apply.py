"""Apply small gates to batches of state vectors (and, through vec(ρ), to dense matrices).

A batch is a C-contiguous complex array of shape (B, 2**n): B state vectors on n qubits, qubit 0
the most significant bit of the index (cirq's convention). A k-qubit matrix acts on the listed
qubits in gate order (its first qubit most significant). Each application is one ``np.matmul``
on a reshaped view (no transposed copies for one qubit or neighbouring qubits); diagonal gates are
a broadcast multiplication.

A dense d x d matrix M is conjugated, M -> U M U†, as the 2n-qubit vector vec(M) (row-major):
U acts on the row qubits and conj(U) on the column qubits (:func:`conjugate`).
"""

from __future__ import annotations

import numpy as np

_SWAP_ORDER = np.array([0, 2, 1, 3])


def _is_diagonal(m: np.ndarray) -> bool:
    return not np.any(m - np.diag(np.diagonal(m)))


def apply_gate(batch: np.ndarray, matrix: np.ndarray, qubits: tuple[int, ...], num_qubits: int) -> np.ndarray:
    """``matrix`` (2**k x 2**k, gate order) applied to ``qubits`` of every vector in ``batch``.

    Args:
        batch: shape (B, 2**num_qubits) or (2**num_qubits,), C-contiguous, complex.
        matrix: the gate, first listed qubit most significant.
        qubits: one or two distinct qubit indices in [0, num_qubits).

    Returns a new array of the same shape.
    """
    shape = batch.shape
    b = batch.reshape(-1, 2**num_qubits)
    m = np.asarray(matrix)
    if len(qubits) == 1:
        (q,) = qubits
        left, right = b.shape[0] << q, 1 << (num_qubits - q - 1)
        v = b.reshape(left, 2, right)
        if _is_diagonal(m):
            out = v * np.diagonal(m).reshape(1, 2, 1)
        elif right == 1:
            out = v.reshape(left, 2) @ m.T
        else:
            out = np.matmul(m, v)
        return out.reshape(shape)
    a, c = qubits
    if a > c:
        a, c = c, a
        m = m[np.ix_(_SWAP_ORDER, _SWAP_ORDER)]
    left, mid, right = b.shape[0] << a, 1 << (c - a - 1), 1 << (num_qubits - c - 1)
    if _is_diagonal(m):
        v = b.reshape(left, 2, mid, 2, right)
        return (v * np.diagonal(m).reshape(1, 2, 1, 2, 1)).reshape(shape)
    if mid == 1:
        v = b.reshape(left, 4, right)
        out = v.reshape(left, 4) @ m.T if right == 1 else np.matmul(m, v)
        return out.reshape(shape)
    v = b.reshape(left, 2, mid, 2, right).transpose(0, 2, 1, 3, 4).reshape(left * mid, 4, right)
    out = v.reshape(left * mid, 4) @ m.T if right == 1 else np.matmul(m, v)
    return out.reshape(left, mid, 2, 2, right).transpose(0, 2, 1, 3, 4).reshape(shape)


def conjugate(dense: np.ndarray, matrix: np.ndarray, qubits: tuple[int, ...], num_qubits: int) -> np.ndarray:
    """M -> U M U† for U = ``matrix`` on ``qubits``; ``dense`` has shape (..., d, d).

    vec(M) in row-major order is a 2n-qubit vector; U acts on the row qubits and conj(U) on the
    column qubits (U M U†)_{ij} = Σ U_ik M_kl conj(U_jl).
    """
    shape = dense.shape
    flat = dense.reshape(-1, 4**num_qubits)
    out = apply_gate(flat, matrix, qubits, 2 * num_qubits)
    out = apply_gate(out, np.conj(matrix), tuple(q + num_qubits for q in qubits), 2 * num_qubits)
    return out.reshape(shape)


def embed(matrix: np.ndarray, qubits: tuple[int, ...], num_qubits: int) -> np.ndarray:
    """The d x d matrix of a local operator on ``qubits`` (identity elsewhere)."""
    d = 2**num_qubits
    # row b of the result is M e_b, i.e. column b of the embedded matrix
    return apply_gate(np.eye(d, dtype=complex), matrix, qubits, num_qubits).T.copy()
