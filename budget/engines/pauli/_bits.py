"""Conjugation by a class of equal Clifford gates with whole-word bit operations.

A Clifford gate maps the bits (x, z) of a Pauli linearly over GF(2) (a symplectic matrix) and
its sign by a Boolean function of the same bits (Aaronson & Gottesman, "Improved simulation of
stabilizer circuits", PRA 70, 052328 (2004)). For a gate on sites (a, a + d) — every site of a
class with the same offset d at once — the four bit planes x_a, z_a, x_{a+d}, z_{a+d} are aligned
on the bits of a (a shift of the packed words by d), the output planes are XORs of the input
planes (the columns of the gate's local permutation on the basis codes X_a, Z_a, X_b, Z_b), and the
sign flips where the local code is one of the negative columns of the gate's transfer matrix. Each
step is one numpy operation on the (rows, words) arrays: nothing is unpacked per qubit.
"""

from __future__ import annotations

import numpy as np

from budget.engines.frame.pauli_frame import WORD_BITS, popcount
from budget.engines.pauli._local import LocalMap
from budget.engines.pauli._rotate import qubit_mask
from budget.engines.pauli._store import Store


def shift(a: np.ndarray, s: int) -> np.ndarray:
    """Rows of packed words moved by ``s`` qubits (s > 0: towards higher qubits), zeros shifted in."""
    if s == 0:
        return a
    w = a.shape[1]
    words, bits = divmod(abs(s), WORD_BITS)
    out = np.zeros_like(a)
    if words >= w:
        return out
    b, rb = np.uint64(bits), np.uint64(WORD_BITS - bits)
    if s > 0:
        out[:, words:] = a[:, : w - words] << b
        if bits and w - words > 1:
            out[:, words + 1:] |= a[:, : w - words - 1] >> rb
    else:
        out[:, : w - words] = a[:, words:] >> b
        if bits and w - words > 1:
            out[:, : w - words - 1] |= a[:, words + 1:] << rb
    return out


def _linear(lmap: LocalMap, planes: int) -> tuple[list[int], list[int]]:
    """(image code of each basis plane, local codes whose image is negative)."""
    perm, sign = lmap.out_index[:, 0].astype(np.int64), lmap.out_value[:, 0]
    images = [int(perm[1 << i]) for i in range(planes)]
    for v in range(1 << planes):
        img = 0
        for i in range(planes):
            if v >> i & 1:
                img ^= images[i]
        if img != perm[v]:
            raise ValueError("Clifford transfer matrix is not GF(2)-linear (internal error)")
    return images, [v for v in range(1 << planes) if sign[v] < 0]


def conjugate_clifford(s: Store, lmap: LocalMap, qa: np.ndarray, qb: np.ndarray | None, n: int) -> Store:
    """Conjugate every row of ``s`` by the Clifford class (lmap on sites (qa[j], qb[j]))."""
    if len(s) == 0:
        return s
    planes = 2 if qb is None else 4
    images, negative = _linear(lmap, planes)
    offsets = np.zeros(len(qa), np.int64) if qb is None else qb - qa
    x, z, flips = s.x.copy(), s.z.copy(), np.zeros(len(s), np.int64)
    for d in np.unique(offsets):
        d = int(d)
        ma = qubit_mask(n, qa[offsets == d])
        mb = shift(ma[None, :], d)[0]
        inp = [x & ma, z & ma]
        if planes == 4:
            inp += [shift(x, -d) & ma, shift(z, -d) & ma]
        out = [np.zeros_like(x) for _ in range(planes)]
        for i, img in enumerate(images):
            for k in range(planes):
                if img >> k & 1:
                    out[k] ^= inp[i]
        if negative:
            neg = np.zeros_like(x)
            for v in negative:
                term = np.broadcast_to(ma, x.shape).copy()
                for i in range(planes):
                    term &= inp[i] if v >> i & 1 else ~inp[i]
                neg |= term
            flips += popcount(neg)
        keep = ~(ma | mb) if planes == 4 else ~ma
        x = (x & keep) | out[0]
        z = (z & keep) | out[1]
        if planes == 4:
            x |= shift(out[2], d)
            z |= shift(out[3], d)
    coef = s.coef * np.where(flips & 1, -1.0, 1.0)[:, None] if np.any(flips & 1) else s.coef
    return Store(x, z, s.key, coef)
