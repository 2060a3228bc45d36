"""Apply small gates to batches of state vectors (and, through vec(M), to dense matrices).

A batch is a C-contiguous complex array of shape (B, 2**n): B state vectors on n qubits, qubit 0
the most significant bit of the index (cirq's convention). A k-qubit matrix acts on the listed
qubits in gate order (its first qubit most significant). Each application is one ``np.matmul``
on a reshaped view (no transposed copies for contiguous qubits); diagonal gates are a broadcast
multiplication.

The operations of one layer act on disjoint qubits, so :func:`fuse` merges those that fall in the
same window of FUSE_WIDTH neighbouring qubits into one matrix (a product for gates, a sum for
generators): a layer then costs a few matrix products instead of one per gate.

A dense d x d matrix M is conjugated, M -> U M U†, as the 2n-qubit vector vec(M) (row-major):
U acts on the row qubits and conj(U) on the column qubits (:func:`conjugate`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Iterable

import numpy as np

FUSE_WIDTH = 5
_SWAP_ORDER = np.array([0, 2, 1, 3])


@dataclass(frozen=True)
class LocalOp:
    """A matrix on some qubits, with its diagonal precomputed when it is diagonal."""

    matrix: np.ndarray
    qubits: tuple[int, ...]
    diagonal: np.ndarray | None

    @classmethod
    def of(cls, matrix: np.ndarray, qubits: Iterable[int]) -> "LocalOp":
        m = np.asarray(matrix, dtype=complex)
        qs = tuple(int(q) for q in qubits)
        if len(qs) == 2 and qs[0] > qs[1]:
            m, qs = m[np.ix_(_SWAP_ORDER, _SWAP_ORDER)], (qs[1], qs[0])
        diag = np.diagonal(m).copy() if not np.any(m - np.diag(np.diagonal(m))) else None
        return cls(m, qs, diag)

    def adjoint(self) -> "LocalOp":
        return LocalOp(self.matrix.conj().T, self.qubits, None if self.diagonal is None else self.diagonal.conj())

    def conj(self) -> "LocalOp":
        return LocalOp(self.matrix.conj(), self.qubits, None if self.diagonal is None else self.diagonal.conj())


def as_rows(a: np.ndarray) -> np.ndarray:
    """``a`` of shape (J, ...) as a (J, prod(...)) matrix, also when J = 0 (where
    ``reshape(J, -1)`` cannot infer the row length)."""
    return a.reshape(a.shape[0], int(np.prod(a.shape[1:], dtype=np.int64)))


def _rows_times(rows: np.ndarray, m: np.ndarray) -> np.ndarray:
    """rows @ m in slices small enough that BLAS stays single-threaded (a threaded product of a
    tall thin matrix is far slower on a busy machine)."""
    left, k = rows.shape
    chunk = max(1, min(left, 2**15 // (k * k)))
    whole = left - left % chunk
    out = np.empty((left, k), dtype=np.result_type(rows, m))
    if whole:
        out[:whole] = np.matmul(rows[:whole].reshape(whole // chunk, chunk, k), m).reshape(whole, k)
    if whole < left:  # the rows left over when ``chunk`` does not divide ``left``
        out[whole:] = rows[whole:] @ m
    return out


def apply(batch: np.ndarray, op: LocalOp, num_qubits: int) -> np.ndarray:
    """``op`` applied to every vector in ``batch`` (shape (B, 2**n) or (2**n,)); a new array."""
    shape = batch.shape
    b = batch.reshape(-1, 2**num_qubits)
    if b.shape[0] == 0:
        return batch.copy()
    qs = op.qubits
    lo, hi = qs[0], qs[-1]
    contiguous = hi - lo == len(qs) - 1
    if contiguous:
        left, right = b.shape[0] << lo, 1 << (num_qubits - hi - 1)
        v = b.reshape(left, 2 ** len(qs), right)
        if op.diagonal is not None:
            out = v * op.diagonal.reshape(1, -1, 1)
        elif right == 1:
            out = _rows_times(v.reshape(left, -1), op.matrix.T)
        else:
            out = np.matmul(op.matrix, v)
        return out.reshape(shape)
    left, mid, right = b.shape[0] << lo, 1 << (hi - lo - 1), 1 << (num_qubits - hi - 1)
    v = b.reshape(left, 2, mid, 2, right)
    if op.diagonal is not None:
        return (v * op.diagonal.reshape(1, 2, 1, 2, 1)).reshape(shape)
    v = v.transpose(0, 2, 1, 3, 4).reshape(left * mid, 4, right)
    out = _rows_times(v.reshape(left * mid, 4), op.matrix.T) if right == 1 else np.matmul(op.matrix, v)
    return out.reshape(left, mid, 2, 2, right).transpose(0, 2, 1, 3, 4).reshape(shape)


def apply_gate(batch: np.ndarray, matrix: np.ndarray, qubits: tuple[int, ...], num_qubits: int) -> np.ndarray:
    """``matrix`` (gate order) applied to ``qubits`` of every vector in ``batch``."""
    return apply(batch, LocalOp.of(matrix, qubits), num_qubits)


def conjugate(dense: np.ndarray, op: LocalOp, num_qubits: int) -> np.ndarray:
    """M -> U M U† for U = ``op``; ``dense`` has shape (..., d, d).

    (U M U†)_{ij} = Σ U_ik M_kl conj(U_jl): U on the row qubits, conj(U) on the column qubits.
    """
    shape = dense.shape
    flat = dense.reshape(-1, 4**num_qubits)
    out = apply(flat, op, 2 * num_qubits)
    shifted = op.conj()
    shifted = LocalOp(shifted.matrix, tuple(q + num_qubits for q in op.qubits), shifted.diagonal)
    return apply(out, shifted, 2 * num_qubits).reshape(shape)


def embed(matrix: np.ndarray, qubits: tuple[int, ...], num_qubits: int) -> np.ndarray:
    """The 2**n x 2**n matrix of a local operator on ``qubits`` (identity elsewhere).

    Small results (n <= FUSE_WIDTH) are cached: the same gates recur in every layer.
    """
    m = np.asarray(matrix, dtype=complex)
    qs = tuple(int(q) for q in qubits)
    if num_qubits <= FUSE_WIDTH:
        return _embed_small(m.tobytes(), m.shape[0], qs, num_qubits).copy()
    return _embed(m, qs, num_qubits)


@lru_cache(maxsize=2048)
def _embed_small(data: bytes, dim: int, qubits: tuple[int, ...], num_qubits: int) -> np.ndarray:
    return _embed(np.frombuffer(data, dtype=complex).reshape(dim, dim), qubits, num_qubits)


def _embed(m: np.ndarray, qubits: tuple[int, ...], num_qubits: int) -> np.ndarray:
    # row b of apply(identity) is M e_b, i.e. column b of the embedded matrix
    return apply_gate(np.eye(2**num_qubits, dtype=complex), m, qubits, num_qubits).T.copy()


def fuse(ops: list[tuple[np.ndarray, tuple[int, ...]]], num_qubits: int, *, product: bool) -> tuple[LocalOp, ...]:
    """Merge operators on disjoint qubits window by window (product of gates, or sum of
    generators); operators that straddle a window boundary stay as they are."""
    windows: dict[int, list] = {}
    rest: list[LocalOp] = []
    for m, qs in ops:
        w = {q // FUSE_WIDTH for q in qs}
        if len(w) == 1:
            windows.setdefault(w.pop(), []).append((m, qs))
        else:
            rest.append(LocalOp.of(m, qs))
    out: list[LocalOp] = []
    for w, items in sorted(windows.items()):
        if len(items) == 1:
            out.append(LocalOp.of(*items[0]))
            continue
        lo = w * FUSE_WIDTH
        width = min(FUSE_WIDTH, num_qubits - lo)
        dw = 2**width
        acc = np.eye(dw, dtype=complex) if product else np.zeros((dw, dw), dtype=complex)
        for m, qs in items:
            e = embed(m, tuple(q - lo for q in qs), width)
            acc = e @ acc if product else acc + e
        out.append(LocalOp.of(acc, range(lo, lo + width)))
    return tuple(out) + tuple(rest)
