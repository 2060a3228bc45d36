"""Conjugation by one-qubit rotations about a Pauli axis, on packed rows, one bit at a time.

A gate exp(-i θ/2 G) with G ∈ {X, Y, Z} on qubit q leaves a Pauli that commutes with G on q
unchanged and maps the two that anticommute into each other:

    P -> cos θ P ± sin θ P',   P' = the other anticommuting letter,

(Z axis: X <-> Y, the z bit toggled; X axis: Z <-> Y, the x bit toggled; Y axis: X <-> Z, both bits
toggled). rz, rx, ry, p/u1 and every phase gate are of this kind; the coefficients are read from the
gate's Pauli transfer matrix (:class:`~budget.engines.pauli._local.LocalMap`), so sign conventions
and the direction (``push``/``pull``) come with it.

For a class of such gates on the qubit mask M, a row's touched bits are its anticommuting letters
on M (e.g. x & M for the Z axis). Rows are split on their lowest touched bit, all rows at once,
and the rows with touched bits left are split again: only active rows are read, so the cost is
proportional to the rows produced, and no per-qubit unpacking is needed (the generic path of
:func:`budget.engines.pauli._store.conjugate` reads every qubit of every row). This is the
branching step of sparse Pauli propagation (Begušić, Gray & Chan, Sci. Adv. 10, eadk4321 (2024)).
"""

from __future__ import annotations

import numpy as np

from budget.engines.frame.pauli_frame import WORD_BITS, num_words
from budget.engines.pauli._store import Store, group_equal

_ONE = np.uint64(1)
MERGE_ROWS = 4096
"""Splitting rows are merged after a bit once there are more than this many."""
AXES = {2: (1, 3), 1: (2, 3), 3: (1, 2)}
"""Fixed local code (Z = 2, X = 1, Y = 3) -> the two codes it rotates into each other."""


def rotation_axis(matrix: np.ndarray) -> int | None:
    """The fixed code a of a one-qubit transfer matrix that maps I and the letter a to themselves and
    the two other letters into each other, or None."""
    if matrix.shape != (4, 4):
        return None
    for a, (p, q) in AXES.items():
        allowed = np.zeros((4, 4), bool)
        allowed[0, 0] = allowed[a, a] = True
        allowed[np.ix_([p, q], [p, q])] = True
        if matrix[0, 0] == 1.0 and matrix[a, a] == 1.0 and not np.any(matrix[~allowed]):
            return a
    return None


def qubit_mask(n: int, qubits: np.ndarray) -> np.ndarray:
    """(W,) uint64 mask with the bits of ``qubits`` set."""
    mask = np.zeros(num_words(n), np.uint64)
    q = np.asarray(qubits, np.int64)
    np.bitwise_or.at(mask, q // WORD_BITS, _ONE << (q % WORD_BITS).astype(np.uint64))
    return mask


def rotate(s: Store, matrix: np.ndarray, axis: int, mask: np.ndarray) -> Store:
    """Conjugate store ``s`` by rotation gates about ``axis`` on every qubit of ``mask`` (see
    module docstring). Returns a new store (not merged).

    Rows still splitting are merged after every bit (rows with equal bits have equal touched bits
    left: the axis's toggles leave the touched letters' test unchanged), so they grow as their
    distinct strings, not as the branches. (Dropping small rows while they split was tried: each
    bit is then one more drop event of the triangle-inequality bound, which grew 4x for 1.5x less
    time on the 100-qubit Ising loop.)"""
    p, q = AXES[axis]
    keep = np.array([matrix[p, p], matrix[q, q]])
    new = np.array([matrix[q, p], matrix[p, q]])
    x, z = s.x, s.z
    touched = (x if axis == 2 else z if axis == 1 else x ^ z) & mask
    active = np.any(touched != 0, axis=1)
    if not active.any():
        return s
    done = [Store(x[~active], z[~active], s.key[~active], s.coef[~active])]
    ax, az, ak, ac, at = x[active], z[active], s.key[active], s.coef[active], touched[active]
    w = x.shape[1]
    while len(ak):
        # the lowest touched bit of each row as a one-bit mask over its words (no gathers)
        if w == 1:
            low = at & (~at + _ONE)
        else:
            nz = at != 0
            first = nz & (np.cumsum(nz, axis=1) == 1)
            low = np.where(first, at & (~at + _ONE), np.uint64(0))
        at ^= low
        # which of the two letters the row has on that bit: the second (Y for Z and X axes, Z for Y)
        letter = np.any((ax if axis == 1 else az) & low, axis=1) if w > 1 else ((ax if axis == 1 else az)[:, 0] & low[:, 0]) != 0
        bx = ax ^ low if axis != 2 else ax
        bz = az ^ low if axis != 1 else az
        letter_i = letter.astype(np.int64)
        bc = ac * new[letter_i][:, None]
        ac = ac * keep[letter_i][:, None]
        # both branches keep the same touched bits left (the toggle stays within the touched
        # letters): rows with none left are done (merged later by the caller's tidy step)
        left = np.any(at != 0, axis=1) if w > 1 else at[:, 0] != 0
        if not left.all():
            out = ~left
            done.append(Store(ax[out], az[out], ak[out], ac[out]))
            done.append(Store(bx[out], bz[out], ak[out], bc[out]))
            ax, az, ak, ac, at, bx, bz, bc = ax[left], az[left], ak[left], ac[left], at[left], bx[left], bz[left], bc[left]
        if not len(ak):
            break
        both = Store(np.concatenate([ax, bx]), np.concatenate([az, bz]), np.concatenate([ak, ak]), np.concatenate([ac, bc]))
        at = np.concatenate([at, at])
        if len(both) > MERGE_ROWS:
            inv, first = group_equal(both._keys())
            if len(first) < len(both):
                coef = np.zeros((len(first), both.columns))
                for k in range(both.columns):
                    coef[:, k] = np.bincount(inv, weights=both.coef[:, k], minlength=len(first))
                both, at = Store(both.x[first], both.z[first], both.key[first], coef), at[first]
        ax, az, ak, ac = both.x, both.z, both.key, both.coef
    return Store.concat(done)
