"""Equal rows of packed Pauli keys: a 64-bit row hash and the grouping it speeds up.

Every Pauli-frame collector adds up terms whose keys (packed X and Z bits, or fingerprints) are
equal; :func:`group_rows` finds them with one sort of 64-bit hashes instead of a sort of whole rows.
"""

from __future__ import annotations

import numpy as np

_MIX = np.random.default_rng(20240611).integers(1, 2**63, size=4096, dtype=np.uint64) | np.uint64(1)


def row_hash(keys: np.ndarray) -> np.ndarray:
    """64-bit hash of each row of a (K, w) uint64 array (w > 2).

    Each word is offset by a per-column random constant and passed through the splitmix64
    finaliser (Steele, Lea & Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014),
    so that a difference in any bit reaches every bit, and the words' hashes are summed. (A plain
    multiply-and-sum lets differences in the top bits of two words cancel, 2^63 + 2^63 = 0, which
    Pauli rows hit all the time.)
    """
    w = keys.shape[1]
    mix = _MIX[:w] if w <= len(_MIX) else np.resize(_MIX, w)
    with np.errstate(over="ignore"):
        z = keys + mix
        z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
        z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
        z ^= z >> np.uint64(31)
        return z.sum(axis=1, dtype=np.uint64)


def group_rows(keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Group equal rows of a (K, w) uint64 array: (inverse index per row, first row of each group).

    Rows are sorted by a 64-bit hash (:func:`row_hash`; random fingerprints of 2 words are their
    own hash); the grouping is then verified word by word and redone exactly
    (``np.unique(axis=0)``) in the unlikely case of a hash collision.
    """
    if len(keys) == 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    h = keys[:, 0] if keys.shape[1] <= 2 else row_hash(keys)
    _, first, inv = np.unique(h, return_index=True, return_inverse=True)
    inv = inv.reshape(-1)
    if not np.array_equal(keys, keys[first][inv]):
        _, first, inv = np.unique(keys, axis=0, return_index=True, return_inverse=True)
        inv = inv.reshape(-1)
    return inv.astype(np.int64), first.astype(np.int64)
