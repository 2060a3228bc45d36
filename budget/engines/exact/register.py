"""Dense registers for the exact engine: a tensor with one axis per qubit, local matrices applied
by matrix products on reshaped views, and fusion of consecutive local operations.

A register holds an array of shape (s,)*n + (C,): ``s = 2`` for state vectors and unitaries,
``s = 4`` for density matrices and superoperators, ``C`` columns (1 for a state, s^n for an
operator built column by column). A density matrix is stored *interleaved*: the axis of qubit q
carries the index 2 r_q + c_q (row bit, column bit), so a channel on k qubits is one 4^k x 4^k
matrix on k axes, the same code path as a gate on a state vector.

A k-site matrix on adjacent axes p..p+k-1 is ``np.matmul(M, view)`` with
view = t.reshape(s^p, s^k, rest): a batched product on a view, no transpose. Two-qubit operations
on axes that are not adjacent move one axis next to the other (one copy) and the register
remembers the new axis order instead of moving it back; ``canonical()`` restores qubit order.

A register may hold a batch of B registers of the same shape side by side (a leading axis): a
local matrix is then either one matrix for every member or a stack of B matrices, one per member,
applied by one batched product (the exact engine's family-split runs go through the circuit
together this way, :mod:`budget.engines.exact.engine`).
"""

from __future__ import annotations

import numpy as np

from budget.memo import distinct


class Register:
    """A tensor of n sites of dimension s and C trailing columns, with a movable axis order.

    Args:
        data: flat array (complex, or real for Pauli-basis density matrices) of length
            batch * s**n * columns, qubit 0 most significant.
        num_qubits: n.
        site_dim: s (2 or 4).
        batch: B, the number of registers held side by side (module docstring).
    """

    def __init__(self, data: np.ndarray, num_qubits: int, site_dim: int, batch: int = 1) -> None:
        self.n = num_qubits
        self.s = site_dim
        self.batch = batch
        self.columns = data.size // (batch * site_dim**num_qubits)
        self.t = np.ascontiguousarray(data).reshape(-1)
        self._buf = np.empty_like(self.t)
        self.order = list(range(num_qubits))  # axis position -> qubit

    @classmethod
    def identity(cls, num_qubits: int, site_dim: int, dtype: type = complex, batch: int = 1) -> "Register":
        flat = np.eye(site_dim**num_qubits, dtype=dtype).reshape(-1)
        return cls(np.tile(flat, batch) if batch > 1 else flat, num_qubits, site_dim, batch)

    def _shape(self) -> tuple[int, ...]:
        return (self.batch,) + (self.s,) * self.n + (self.columns,)

    def _swap_buffers(self) -> None:
        self.t, self._buf = self._buf, self.t

    def _move_axis(self, src: int, dst: int) -> None:
        moved = np.moveaxis(self.t.reshape(self._shape()), src + 1, dst + 1)
        np.copyto(self._buf.reshape(moved.shape), moved)
        self._swap_buffers()
        q = self.order.pop(src)
        self.order.insert(dst, q)

    def apply(self, qubits: tuple[int, ...], matrix: np.ndarray) -> None:
        """Multiply the register by ``matrix`` acting on ``qubits`` (in the matrix's site order);
        a stack of B matrices acts member by member."""
        s = self.s
        if len(qubits) == 1:
            p = self.order.index(qubits[0])
        else:
            a, b = qubits
            pa, pb = self.order.index(a), self.order.index(b)
            if abs(pa - pb) != 1:
                self._move_axis(pb, pa + 1 if pb > pa else pa)
                pa, pb = self.order.index(a), self.order.index(b)
            if pb < pa:  # the axes are (b, a): reorder the matrix's sites
                matrix = swap_sites(matrix, s)
            p = min(pa, pb)
        k = len(qubits)
        if matrix.ndim == 3:  # one matrix per member
            view = self.t.reshape(self.batch, s**p, s**k, -1)
            matrix = matrix[:, None]
        else:
            view = self.t.reshape(self.batch * s**p, s**k, -1)
        np.matmul(matrix, view, out=self._buf.reshape(view.shape))
        self._swap_buffers()

    def canonical(self) -> np.ndarray:
        """The array as (s^n, C) in qubit order (qubit 0 most significant), (B, s^n, C) for a
        batch; a view when possible."""
        if self.order != list(range(self.n)):
            shape = self._shape()
            perm = [0] + [self.order.index(q) + 1 for q in range(self.n)] + [self.n + 1]
            np.copyto(self._buf.reshape(shape), self.t.reshape(shape).transpose(perm))
            self._swap_buffers()
            self.order = list(range(self.n))
        lead = (self.batch,) if self.batch > 1 else ()
        return self.t.reshape(lead + (self.s**self.n, self.columns))

    def apply_full(self, matrix: np.ndarray) -> None:
        """Multiply by a matrix on all n sites (e.g. a repeated block raised to its power), or by
        a stack of B such matrices member by member."""
        data = self.canonical()
        np.matmul(matrix, data, out=self._buf.reshape(data.shape))
        self._swap_buffers()


def swap_sites(matrix: np.ndarray, s: int) -> np.ndarray:
    """The same two-site operator (or stack of them) written with its two sites in the other order."""
    lead = matrix.shape[:-2]
    return np.einsum("...abcd->...badc", matrix.reshape(lead + (s, s, s, s))).reshape(lead + (s * s, s * s))


_EYE = {2: np.eye(2), 4: np.eye(4)}


def _embed(matrix: np.ndarray, sites: tuple[int, ...], target: tuple[int, ...], s: int) -> np.ndarray:
    """A one- or two-site operator on ``sites`` written on the two sites ``target``."""
    if sites == target:
        return matrix
    if len(sites) == 2:
        return swap_sites(matrix, s)
    eye = _EYE[s]
    shape = matrix.shape[:-2] + (s * s, s * s)
    if sites[0] == target[0]:  # matrix ⊗ 1
        return (matrix[..., :, None, :, None] * eye[:, None, :]).reshape(shape)
    return (eye[:, None, :, None] * matrix[..., None, :, None, :]).reshape(shape)  # 1 ⊗ matrix


class Fuser:
    """Collects local operations and multiplies consecutive ones on at most two qubits together
    before they touch the register (each qubit has at most one pending operation).

    Pending operations sit on disjoint qubits, so they commute and can be applied in any order.
    """

    def __init__(self, register: Register) -> None:
        self.reg = register
        self._pending: dict[int, tuple[tuple[int, ...], np.ndarray]] = {}

    def add(self, qubits: tuple[int, ...], matrix: np.ndarray) -> None:
        entries = distinct(e for q in qubits if (e := self._pending.get(q)) is not None)
        union = set(qubits).union(*(e[0] for e in entries))
        if len(union) > 2:
            for e in list(entries):
                self._flush(e)
            self._store(qubits, matrix)
            return
        if len(union) == len(qubits):
            target = qubits
        else:
            big = [e[0] for e in entries if len(e[0]) == 2]
            target = big[0] if big else qubits + tuple(union - set(qubits))
        s = self.reg.s
        combined = _embed(matrix, qubits, target, s)
        for sites, m in entries:
            combined = combined @ _embed(m, sites, target, s)
        for q in union:
            self._pending.pop(q, None)
        self._store(target, combined)

    def _store(self, qubits: tuple[int, ...], matrix: np.ndarray) -> None:
        entry = (qubits, matrix)
        for q in qubits:
            self._pending[q] = entry

    def _flush(self, entry: tuple[tuple[int, ...], np.ndarray]) -> None:
        qubits, matrix = entry
        for q in qubits:
            del self._pending[q]
        self.reg.apply(qubits, matrix)

    def flush(self) -> None:
        """Apply every pending operation."""
        for entry in distinct(self._pending.values()):
            self._flush(entry)
