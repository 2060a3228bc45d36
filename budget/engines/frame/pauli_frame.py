"""Packed Pauli strings and a running Pauli map (a tableau), vectorised with numpy.

A Pauli string on n qubits is kept as bit rows: x (W words of 64 bits), z (W words) and a phase
exponent e in Z_4, meaning i^e X^x Z^z with every X factor written before every Z factor; products
(one AND and one popcount per word) and signs are :func:`budget.pauli_algebra.row_product` and
:func:`budget.pauli_algebra.hermitian_sign`. On |0…0> the Pauli acts as i^e |x>.

A :class:`Frame` holds the images of the 2n generators X_0..X_{n-1}, Z_0..Z_{n-1} under a Clifford
conjugation (rows 0..n-1 and n..2n-1; an extra last row is the identity, so "no generator" can be
gathered like any other row). Because conjugation is a group homomorphism, the image of any Pauli is
the product of the rows of its generators (Aaronson & Gottesman, "Improved simulation of stabilizer
circuits", Phys. Rev. A 70, 052328 (2004)). Updating the map by one layer of gates only rewrites the
rows of the gates' qubits: new row(G) = old map applied to the gate's local image of G.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import stim

from budget.circuit.clifford_check import LocalClifford
from budget.pauli_algebra import LocalPauli, hermitian_sign, popcount, row_product

WORD_BITS = 64
HASH_BITS = 128
_HASH_SEED = 20240611


def num_words(n: int) -> int:
    """Words of 64 bits needed for n qubits (at least one)."""
    return max(1, (n + WORD_BITS - 1) // WORD_BITS)


def pack_bits(qubits: list[int] | np.ndarray, n: int) -> np.ndarray:
    """One row of W words with the given qubit bits set."""
    row = np.zeros(num_words(n), dtype=np.uint64)
    for q in qubits:
        row[q // WORD_BITS] |= np.uint64(1) << np.uint64(q % WORD_BITS)
    return row


def unpack_bits(rows: np.ndarray, n: int) -> np.ndarray:
    """Bits of packed rows (…, W) as uint8 (…, n), qubit q at position q."""
    b = np.unpackbits(np.ascontiguousarray(rows).view(np.uint8), axis=-1, bitorder="little")
    return b[..., :n]


@dataclass(frozen=True)
class GateClass:
    """All gates of one layer with the same local action, as index arrays.

    Attributes:
        qubits: (m, k) global qubit indices, gate order.
        images: the 2k local images (of X_0..X_{k-1}, Z_0..Z_{k-1}) for the chosen direction.
    """

    qubits: np.ndarray
    images: tuple[LocalPauli, ...]


def layer_classes(ops: list[tuple[tuple[int, ...], LocalClifford]], direction: str) -> tuple[GateClass, ...]:
    """Group a layer's (qubits, local Clifford) pairs by their local images.

    ``direction`` ``"pull"`` uses U† G U (map each Pauli back towards the input), ``"push"`` uses
    U G U† (towards the output). Identity gates are left out.
    """
    groups: dict[tuple, list[tuple[int, ...]]] = {}
    for qubits, cl in ops:
        if not cl.is_identity:
            groups.setdefault(cl.backward if direction == "pull" else cl.forward, []).append(qubits)
    return tuple(GateClass(np.array(qs, dtype=np.int64).reshape(len(qs), -1), images) for images, qs in groups.items())


@lru_cache(maxsize=8)
def _masks(n: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(_HASH_SEED)
    w = num_words(n)
    mx = rng.integers(0, 2**64, size=(HASH_BITS, w), dtype=np.uint64, endpoint=False)
    mz = rng.integers(0, 2**64, size=(HASH_BITS, w), dtype=np.uint64, endpoint=False)
    return mx, mz


def fingerprints(x: np.ndarray, z: np.ndarray | None) -> np.ndarray:
    """128-bit GF(2)-linear fingerprints (R, 2) uint64 of Pauli bit rows (R, W).

    Bit k is the parity of |x ∧ m_k| + |z ∧ m'_k| for fixed random masks, so the fingerprint of a
    product is the XOR of the fingerprints, and two different bit patterns share a fingerprint with
    probability 2^-128. ``z=None`` fingerprints the X part alone.
    """
    n = x.shape[-1] * WORD_BITS
    mx, mz = _masks(n)
    mx, mz = mx[:, : x.shape[-1]], mz[:, : x.shape[-1]]
    bits = popcount(x[:, None, :] & mx[None])
    if z is not None:
        bits = bits + popcount(z[:, None, :] & mz[None])
    bits = (bits & 1).astype(np.uint8)  # (R, 128)
    return np.packbits(bits, axis=1, bitorder="little").view(np.uint64).reshape(-1, 2)


@lru_cache(maxsize=8)
def identity_fingerprints(n: int) -> tuple[np.ndarray, np.ndarray]:
    """(fx, fxz) of the identity frame's 2n + 1 rows, read off the masks: bit k of the
    fingerprint of X_q (or Z_q) is bit q of the k-th x (or z) mask. Treat as read-only."""
    mx, mz = _masks(n)
    bx = np.ascontiguousarray(unpack_bits(mx, n).T)  # (n, 128): bit k of the fingerprint of X_q
    bz = np.ascontiguousarray(unpack_bits(mz, n).T)
    pack = lambda b: np.packbits(b, axis=1, bitorder="little").view(np.uint64).reshape(-1, 2)  # noqa: E731
    zero = np.zeros((1, 2), np.uint64)
    fxz = np.concatenate([pack(bx), pack(bz), zero])
    fx = np.concatenate([pack(bx), np.zeros((n, 2), np.uint64), zero])
    return fx, fxz


class Frame:
    """A Pauli map P -> W† P W (or W P W†) kept as the images of the generators.

    Attributes:
        n: number of qubits.
        x, z: (2n+1, W) uint64 rows; row q is the image of X_q, row n+q that of Z_q, row 2n the
            identity.
        e: (2n+1,) phase exponents in Z_4.
        fx, fxz: (2n+1, 2) fingerprints of each row's X part and of the whole row (kept up to date
            by XOR, since they are linear).
    """

    def __init__(self, n: int, x: np.ndarray, z: np.ndarray, e: np.ndarray, *, fx=None, fxz=None):
        self.n, self.x, self.z, self.e = n, x, z, e
        self.fx = fingerprints(x, None) if fx is None else fx
        self.fxz = fingerprints(x, z) if fxz is None else fxz

    @classmethod
    def identity(cls, n: int) -> "Frame":
        w = num_words(n)
        x = np.zeros((2 * n + 1, w), dtype=np.uint64)
        z = np.zeros((2 * n + 1, w), dtype=np.uint64)
        q = np.arange(n)
        bits = np.uint64(1) << (q % WORD_BITS).astype(np.uint64)
        x[q, q // WORD_BITS] = bits
        z[n + q, q // WORD_BITS] = bits
        fx, fxz = identity_fingerprints(n)
        return cls(n, x, z, np.zeros(2 * n + 1, dtype=np.uint8), fx=fx.copy(), fxz=fxz.copy())

    def copy(self) -> "Frame":
        f = Frame.__new__(Frame)
        f.n, f.x, f.z, f.e, f.fx, f.fxz = self.n, self.x.copy(), self.z.copy(), self.e.copy(), self.fx.copy(), self.fxz.copy()
        return f

    def equals(self, other: "Frame") -> bool:
        return (
            np.array_equal(self.e, other.e) and np.array_equal(self.x, other.x) and np.array_equal(self.z, other.z)
        )

    def rows(self, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The rows at ``idx`` (any shape), as (x, z, e)."""
        return self.x[idx], self.z[idx], self.e[idx]

    def image(self, slots: np.ndarray, e0: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Images of local Paulis i^e0 · Π_j row(slots[:, j]) (slot columns in X-then-Z order).

        Args:
            slots: (T, s) row indices; 2n for "no generator".
            e0: (T,) phase exponents of the local Paulis.
        """
        acc = self.rows(slots[:, 0])
        for j in range(1, slots.shape[1]):
            acc = row_product(acc, self.rows(slots[:, j]))
        return acc[0], acc[1], ((acc[2].astype(np.int64) + e0) & 3).astype(np.uint8)

    def image_x(self, slots: np.ndarray) -> np.ndarray:
        """Only the X bits of the images (XOR of the rows' X bits; no phase needed)."""
        acc = self.x[slots[:, 0]]
        for j in range(1, slots.shape[1]):
            acc = acc ^ self.x[slots[:, j]]
        return acc

    def image_z(self, slots: np.ndarray) -> np.ndarray:
        """Only the Z bits of the images."""
        acc = self.z[slots[:, 0]]
        for j in range(1, slots.shape[1]):
            acc = acc ^ self.z[slots[:, j]]
        return acc

    def apply(self, classes: tuple[GateClass, ...]) -> None:
        """Compose with one layer: new row(G) = current map applied to the gate's image of G."""
        n = self.n
        for cls in classes:
            k = cls.qubits.shape[1]
            gens = [cls.qubits[:, j] for j in range(k)] + [n + cls.qubits[:, j] for j in range(k)]
            old = [self.rows(g) for g in gens]
            old_f = [(self.fx[g], self.fxz[g]) for g in gens]
            new = []
            for xb, zb, e in cls.images:
                acc = None
                fx = fxz = 0
                for j, bit in enumerate(xb + zb):
                    if bit:
                        acc = old[j] if acc is None else row_product(acc, old[j])
                        fx, fxz = fx ^ old_f[j][0], fxz ^ old_f[j][1]
                new.append((acc[0], acc[1], ((acc[2].astype(np.int64) + e) & 3).astype(np.uint8), fx, fxz))
            for g, (x, z, e, fx, fxz) in zip(gens, new):
                self.x[g], self.z[g], self.e[g], self.fx[g], self.fxz[g] = x, z, e, fx, fxz

    def to_stim(self):
        """The same map as a ``stim.Tableau`` (for powers of large blocks; see _walk)."""
        n = self.n
        xb = unpack_bits(self.x[: 2 * n], n).astype(bool)
        zb = unpack_bits(self.z[: 2 * n], n).astype(bool)
        signs = hermitian_sign(self.x[: 2 * n], self.z[: 2 * n], self.e[: 2 * n]) < 0
        return stim.Tableau.from_numpy(
            x2x=xb[:n], x2z=zb[:n], z2x=xb[n:], z2z=zb[n:], x_signs=signs[:n], z_signs=signs[n:]
        )

    @classmethod
    def from_stim(cls, tab) -> "Frame":
        n = len(tab)
        x2x, x2z, z2x, z2z, xs, zs = tab.to_numpy()
        w = num_words(n)
        f = cls(n, np.zeros((2 * n + 1, w), np.uint64), np.zeros((2 * n + 1, w), np.uint64), np.zeros(2 * n + 1, np.uint8), fx=0, fxz=0)

        def pack(bits: np.ndarray) -> np.ndarray:
            padded = np.zeros((bits.shape[0], w * WORD_BITS), dtype=bool)
            padded[:, :n] = bits
            return np.packbits(padded, axis=1, bitorder="little").view(np.uint64)

        f.x[: 2 * n] = pack(np.vstack([x2x, z2x]))
        f.z[: 2 * n] = pack(np.vstack([x2z, z2z]))
        base = popcount(f.x[: 2 * n] & f.z[: 2 * n]) + 2 * np.concatenate([xs, zs]).astype(np.int64)
        f.e[: 2 * n] = (base & 3).astype(np.uint8)
        f.fx, f.fxz = fingerprints(f.x, None), fingerprints(f.x, f.z)
        return f
