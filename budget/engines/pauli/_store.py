"""A sparse sum of Hermitian Pauli strings with real coefficients, as packed bit rows.

Row t is the operator Σ_k coef[t, k] · P_t for column k (a gate family, a knob label, or the one
column of an observable), P_t = ⊗_q σ(x_q, z_q) with σ(1,0) = X, σ(0,1) = Z, σ(1,1) = Y (Hermitian,
unlike the i^e X^x Z^z rows of :mod:`budget.engines.frame.pauli_frame`, whose packed words it shares:
W = ceil(n / 64) uint64 words for x and for z). ``key`` separates sums kept in one store (an
observable index, a jump-operator tag); rows with equal (x, z, key) are merged by sorting a 64-bit
row hash (:func:`budget.engines.frame.rows.group_rows`), never by Python dictionaries.

Conjugation by a unitary preserves real coefficients (the Pauli transfer matrix of a unitary
channel is real) and the Hilbert-Schmidt norm ‖A‖² = Tr(A†A)/d = Σ_t coef_t² (Paulis are
orthonormal), which is what makes the truncation bound of the engine cheap.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from budget.engines.frame.rows import row_hash
from budget.engines.frame.pauli_frame import WORD_BITS, num_words
from budget.engines.pauli._local import LocalMap

_ONE = np.uint64(1)
_SHIFT = np.uint64(32)
_LOW = np.uint64(1 << 32)


@dataclass
class Store:
    """Rows (x, z, key) with coefficients (T, K); see module docstring."""

    x: np.ndarray
    z: np.ndarray
    key: np.ndarray
    coef: np.ndarray

    @classmethod
    def empty(cls, n: int, k: int) -> "Store":
        w = num_words(n)
        return cls(np.zeros((0, w), np.uint64), np.zeros((0, w), np.uint64), np.zeros(0, np.int64), np.zeros((0, k)))

    def __len__(self) -> int:
        return len(self.key)

    @property
    def columns(self) -> int:
        return self.coef.shape[1]

    def take(self, idx) -> "Store":
        return Store(self.x[idx], self.z[idx], self.key[idx], self.coef[idx])

    def copy(self) -> "Store":
        return Store(self.x.copy(), self.z.copy(), self.key.copy(), self.coef.copy())

    @staticmethod
    def concat(parts: list["Store"]) -> "Store":
        parts = [p for p in parts if len(p)] or parts[:1]
        if len(parts) == 1:
            return parts[0]
        return Store(*(np.concatenate([getattr(p, f) for p in parts]) for f in ("x", "z", "key", "coef")))

    def merged(self) -> "Store":
        """Rows with equal (x, z, key) summed into one; rows whose coefficients are all zero dropped."""
        if len(self) == 0:
            return self
        inv, first = group_equal(self._keys())
        if len(first) < len(self):
            coef = np.zeros((len(first), self.columns))
            for k in range(self.columns):
                coef[:, k] = np.bincount(inv, weights=self.coef[:, k], minlength=len(first))
            out = Store(self.x[first], self.z[first], self.key[first], coef)
        else:
            out = self
        keep = np.any(out.coef != 0.0, axis=1)
        return out if keep.all() else out.take(keep)

    def _keys(self) -> np.ndarray:
        """(T, w) uint64 words that identify a row: x, z and key (left out when constant, as in
        the coherent sums), or, when x and z fit in 32 bits and the key is constant (the coherent
        sums on up to 32 qubits), the one word x + 2^32 z."""
        constant = self.key[0] == self.key[-1] and np.all(self.key == self.key[0])
        if constant and self.x.shape[1] == 1 and (self.x | self.z).max() < _LOW:
            return self.x | (self.z << _SHIFT)
        if constant:
            return np.concatenate([self.x, self.z], axis=1)
        return np.concatenate([self.x, self.z, self.key.view(np.uint64)[:, None]], axis=1)

    def total(self, weights: np.ndarray | None = None) -> np.ndarray:
        """Σ_k coef[:, k] (weights[k])."""
        return self.coef.sum(axis=1) if weights is None else self.coef @ weights


def group_equal(keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(inverse index per row, one row of each group) of equal rows of a (T, w) uint64 array.

    One word is its own key; wider rows are sorted by a 64-bit row hash (:func:`row_hash` of the
    words folded in pairs, w_2i · C + w_2i+1 with C odd and random: half the words to mix), the
    rows that share a hash are checked against their group's representative, and the grouping is
    redone exactly with ``np.unique(axis=0)`` on a collision."""
    if len(keys) == 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    h = keys[:, 0] if keys.shape[1] == 1 else row_hash(_folded(keys))
    order = np.argsort(h)
    hs = h[order]
    new = np.empty(len(h), bool)
    new[0] = True
    np.not_equal(hs[1:], hs[:-1], out=new[1:])
    gid = np.cumsum(new) - 1
    inv = np.empty(len(h), np.int64)
    inv[order] = gid
    first = order[new]
    if keys.shape[1] > 1:
        later = order[~new]
        if len(later) and not np.array_equal(keys[later], keys[first[gid[~new]]]):
            _, first, inv = np.unique(keys, axis=0, return_index=True, return_inverse=True)
            return inv.reshape(-1).astype(np.int64), first.astype(np.int64)
    return inv, first


_FOLD = np.uint64(0x9E3779B97F4A7C15)  # odd (the 64-bit golden ratio constant)


def _folded(keys: np.ndarray) -> np.ndarray:
    """Words paired as w_2i · C + w_2i+1 (wrapping; a hash input only, never a key)."""
    w = keys.shape[1]
    if w < 4:
        return keys
    with np.errstate(over="ignore"):
        out = keys[:, 0 : w - 1 : 2] * _FOLD + keys[:, 1:w:2]
    return np.concatenate([out, keys[:, w - 1 :]], axis=1) if w % 2 else out


def from_local(n: int, qa: np.ndarray, qb: np.ndarray, v: np.ndarray, key: np.ndarray, coef: np.ndarray) -> Store:
    """Rows for local Paulis ``v`` (local index c_a + 4 c_b) on qubits qa, qb (qb = -1 for one qubit)."""
    t = len(v)
    w = num_words(n)
    x = np.zeros((t, w), np.uint64)
    z = np.zeros((t, w), np.uint64)
    v = v.astype(np.int64)
    for q, code in ((qa, v & 3), (qb, (v >> 2) & 3)):
        q = np.asarray(q, np.int64)
        ok = (q >= 0) & (code > 0)
        if not np.any(ok):
            continue
        rows, qq, cc = np.nonzero(ok)[0], q[ok], code[ok]
        bit = _ONE << (qq % WORD_BITS).astype(np.uint64)
        np.bitwise_or.at(x, (rows, qq // WORD_BITS), np.where(cc & 1, bit, np.uint64(0)))
        np.bitwise_or.at(z, (rows, qq // WORD_BITS), np.where(cc & 2, bit, np.uint64(0)))
    return Store(x, z, np.asarray(key, np.int64), np.asarray(coef, float).reshape(t, -1))


BLOCK_ROWS = 1 << 16
"""Rows unpacked at once when reading local indices (bounds the temporaries to a few MB)."""


def _unpack_t(words: np.ndarray) -> np.ndarray:
    """(64 W, B) uint8 bits of packed rows (B, W), one row per qubit (row gathers are cheap)."""
    return np.ascontiguousarray(np.unpackbits(words.view(np.uint8), axis=1, bitorder="little").T)


def _site_codes(ux: np.ndarray, uz: np.ndarray, qa: np.ndarray, qb: np.ndarray | None) -> np.ndarray:
    v = ux[qa] | (uz[qa] << 1)
    if qb is not None:
        v |= (ux[qb] << 2) | (uz[qb] << 3)
    return v


def local_indices(s: Store, qa: np.ndarray, qb: np.ndarray | None) -> np.ndarray:
    """(T, m) uint8 local index of every row on each site (qa[j], qb[j])."""
    t = len(s)
    out = np.empty((t, len(qa)), np.uint8)
    for lo in range(0, t, BLOCK_ROWS):
        hi = min(t, lo + BLOCK_ROWS)
        out[lo:hi] = _site_codes(_unpack_t(s.x[lo:hi]), _unpack_t(s.z[lo:hi]), qa, qb).T
    return out


def _set_code(s: Store, rows: np.ndarray, q: np.ndarray, code: np.ndarray) -> None:
    """Set qubit q[i] of row rows[i] to the one-qubit code code[i] (rows unique per call)."""
    q = np.asarray(q, np.int64)
    wd = q // WORD_BITS
    bit = _ONE << (q % WORD_BITS).astype(np.uint64)
    code = np.asarray(code).astype(np.uint64)
    s.x[rows, wd] = (s.x[rows, wd] & ~bit) | ((code & _ONE) * bit)
    s.z[rows, wd] = (s.z[rows, wd] & ~bit) | (((code >> _ONE) & _ONE) * bit)


def _set_local(s: Store, rows: np.ndarray, qa, qb, w: np.ndarray) -> None:
    """Set the local Pauli of rows[i] on site (qa[i], qb[i]) to w[i] (qb < 0: one qubit)."""
    w = np.asarray(w, np.int64)
    qa = np.broadcast_to(np.asarray(qa, np.int64), w.shape)
    qb = np.broadcast_to(np.asarray(qb, np.int64), w.shape)
    _set_code(s, rows, qa, w & 3)
    two = qb >= 0
    if two.any():
        _set_code(s, rows[two], qb[two], (w[two] >> 2) & 3)


def _ranges(starts: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """Concatenation of arange(starts[i], starts[i] + lengths[i])."""
    total = int(lengths.sum())
    offsets = np.repeat(np.cumsum(lengths) - lengths, lengths)
    return np.repeat(starts, lengths) + np.arange(total) - offsets


def conjugate(s: Store, lmap: LocalMap, qa: np.ndarray, qb: np.ndarray | None) -> Store:
    """Apply the same local map (a gate's transfer matrix) on every site (qa[j], qb[j]) (disjoint).

    A row whose local Pauli on a touched site j is v_j becomes the rows Π_j (Σ_w M[w, v_j] P_w):
    one output row per combination of branches (a Clifford gate keeps one row per row). All rows
    are expanded at once: the output count of a row is Π_j b(v_j), and output k of a row takes on
    its r-th touched site the branch (k // Π_{r'<r} b) mod b_r (mixed radix). Not merged. (Clifford
    classes and one-qubit axis rotations take the faster paths of :mod:`budget.engines.pauli._bits`
    and :mod:`budget.engines.pauli._rotate`.)
    """
    if len(s) == 0 or len(qa) == 0:
        return s
    vm = local_indices(s, qa, qb)
    touched = np.any(vm != 0, axis=1)
    if not touched.any():
        return s
    if touched.all():
        rest, work = s.take(np.zeros(0, np.int64)), s.copy()
    else:
        rest, work, vm = s.take(~touched), s.take(touched), vm[touched]
    rows_p, sites_p = np.nonzero(vm)  # pairs (row, site), sorted by row then site
    v_p = vm[rows_p, sites_p].astype(np.int64)
    nb = np.count_nonzero(lmap.out_value, axis=1).astype(np.int64)
    b_p = nb[v_p]
    r_count = len(work)
    first = np.searchsorted(rows_p, np.arange(r_count))
    rank_p = np.arange(len(rows_p)) - first[rows_p]
    by_rank = [np.nonzero(rank_p == r)[0] for r in range(int(rank_p.max()) + 1)]
    count = np.ones(r_count, np.int64)
    stride_p = np.empty(len(rows_p), np.int64)
    for sel in by_rank:
        stride_p[sel] = count[rows_p[sel]]
        count[rows_p[sel]] *= b_p[sel]
    start = np.cumsum(count) - count
    out = work.take(np.repeat(np.arange(r_count), count)) if np.any(count > 1) else work
    qb_all = qb if qb is not None else np.full(len(qa), -1, np.int64)
    for sel in by_rank:
        rr = rows_p[sel]
        o = _ranges(start[rr], count[rr])
        pp = np.repeat(sel, count[rr])
        branch = ((o - start[rows_p[pp]]) // stride_p[pp]) % b_p[pp]
        vv = v_p[pp]
        val = lmap.out_value[vv, branch]
        if not lmap.clifford or np.any(val != 1.0):
            out.coef[o] *= val[:, None]
        site = sites_p[pp]
        _set_local(out, o, qa[site], qb_all[site], lmap.out_index[vv, branch])
    return Store.concat([rest, out])


def generate(s: Store, matrices: list[np.ndarray], qa: np.ndarray, qb: np.ndarray) -> Store:
    """Rows of Σ_j G_j(s), G_j a local map (matrix) on site (qa[j], qb[j]) (qb = -1: one qubit) with
    G_j(I) = 0 (trace-preserving generators), so only rows touching a site contribute. Not merged."""
    if len(s) == 0 or len(matrices) == 0:
        return s.take(np.zeros(0, np.int64))
    two = qb >= 0
    out = []
    for group, qbs in ((~two, None), (two, qb)):
        idx = np.nonzero(group)[0]
        if len(idx) == 0:
            continue
        vv = local_indices(s, qa[idx], None if qbs is None else qb[idx]).T
        for jj, j in enumerate(idx):
            rows = np.nonzero(vv[jj])[0]
            if len(rows) == 0:
                continue
            m = matrices[j]
            cols = m[:, vv[jj][rows]]  # (4^k, R)
            ws, rs = np.nonzero(cols)
            if len(ws) == 0:
                continue
            new = s.take(rows[rs])
            new.coef *= cols[ws, rs][:, None]
            _set_local(new, np.arange(len(rs)), qa[j], qb[j], ws)
            out.append(new)
    return Store.concat(out) if out else s.take(np.zeros(0, np.int64))
