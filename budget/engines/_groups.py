"""Sum coherent amplitudes within groups of equal Pauli keys; totals, shares, resummation, map.

Within a group every term is the same Pauli (process metric) or acts the same way on |0…0> (state
metric), so amplitudes add: A_g = Σ_{t∈g} a_t, and the group contributes |A_g|² to first order
(Blume-Kohout et al., PRX Quantum 3, 020335 (2022)). Term t's share is Re(conj(a_t) A_g); the
shares of a group add up to |A_g|² and can be negative (a term that cancels the others).

Resummed estimate. All terms of a group commute, so a group alone is exactly exp(-i A_g Q_g): it
costs sin²|A_g| of fidelity (process metric: |Tr e^{-iAQ}/d|² = cos² A; state metric: the group
only mixes |0…0> with |x>, giving cos²|A_x|). Treating groups as independent,
F ≈ Π_g cos²|A_g| · Π_t (1 - p_t), exact when the groups commute and share no products, correct to
second order otherwise.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse

from budget.engines._pauli_frame import unpack_bits
from budget.engines._sinks import PauliSink

_MIX = np.random.default_rng(20240611).integers(1, 2**63, size=4096, dtype=np.uint64) | np.uint64(1)


def group_rows(keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Group equal rows of a (K, w) uint64 array: (inverse index per row, first row of each group).

    A 64-bit multiplicative hash sorts the rows; the grouping is then verified word by word and
    redone exactly (``np.unique(axis=0)``) in the unlikely case of a hash collision.
    """
    if len(keys) == 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    w = keys.shape[1]
    mix = _MIX[:w] if w <= len(_MIX) else np.resize(_MIX, w)
    with np.errstate(over="ignore"):
        h = (keys * mix).sum(axis=1, dtype=np.uint64)
        h ^= h >> np.uint64(29)
    _, first, inv = np.unique(h, return_index=True, return_inverse=True)
    inv = inv.reshape(-1)
    if not np.array_equal(keys, keys[first][inv]):
        _, first, inv = np.unique(keys, axis=0, return_index=True, return_inverse=True)
        inv = inv.reshape(-1)
    return inv.astype(np.int64), first.astype(np.int64)


@dataclass(frozen=True)
class Budget:
    """First-order and resummed totals of one metric, with per-source shares.

    Attributes:
        coherent, stochastic: first-order parts (Σ |A_g|², Σ counted p).
        resummed: 1 - Π cos²|A_g| Π (1 - p).
        source_shares: first-order share of each source (adds up to coherent + stochastic).
        groups: number of distinct coherent groups (zero group excluded in the state metric).
        max_amplitude: largest |A_g| in radians.
        landing: per-qubit first-order marginal (``None`` unless asked for; process metric).
    """

    coherent: float
    stochastic: float
    resummed: float
    source_shares: np.ndarray
    groups: int
    max_amplitude: float
    landing: np.ndarray | None = None

    @property
    def first_order(self) -> float:
        return self.coherent + self.stochastic


def _zero_group(keys: np.ndarray, first: np.ndarray) -> np.ndarray:
    return ~np.any(keys[first] != 0, axis=1)


def aggregate(sink: PauliSink, num_sources: int, n: int, *, state: bool, landing: bool = False) -> Budget:
    """Totals from a filled :class:`PauliSink` (``state`` drops the x = 0 group: <H>, no variance)."""
    keys, amps, src = sink.coherent_terms()
    inv, first = group_rows(keys)
    amp_g = np.bincount(inv, weights=amps.real, minlength=len(first)) + 1j * np.bincount(
        inv, weights=amps.imag, minlength=len(first)
    )
    if state and len(first):
        amp_g[_zero_group(keys, first)] = 0.0
    mag = np.abs(amp_g)
    shares = np.bincount(src, weights=np.real(np.conj(amps) * amp_g[inv]), minlength=num_sources)
    shares = shares + sink.stochastic_by_source(num_sources)
    sto = float(np.sum(sink.stochastic_by_source(num_sources)))
    cos2 = np.cos(np.minimum(mag, np.pi / 2)) ** 2
    log_f = float(np.sum(np.log(cos2))) if np.all(cos2 > 0) else -np.inf
    resummed = float(-np.expm1(log_f + sink.stochastic_log_fidelity()))
    land = None
    if landing:
        land = sink.stochastic_landing(n) + _landing(keys[first], mag**2, n)
    return Budget(
        coherent=float(np.sum(mag**2)),
        stochastic=sto,
        resummed=resummed,
        source_shares=shares,
        groups=int(np.count_nonzero(mag)),
        max_amplitude=float(mag.max()) if len(mag) else 0.0,
        landing=land,
    )


def _landing(group_keys: np.ndarray, weights: np.ndarray, n: int, chunk: int = 8192) -> np.ndarray:
    """Σ_g w_g [q ∈ support(Q_g)] for full-Pauli keys (x words then z words)."""
    out = np.zeros(n)
    if not len(group_keys):
        return out
    w = group_keys.shape[1] // 2
    for i in range(0, len(group_keys), chunk):
        k = group_keys[i : i + chunk]
        out += weights[i : i + chunk] @ unpack_bits(k[:, :w] | k[:, w:], n)
    return out


def quadratic_matrix(sink: PauliSink, num_labels: int, *, state: bool) -> np.ndarray:
    """A_{ij} = Σ_g Re(conj(B_{g i}) B_{g j}), B_{g i} the summed unit amplitude of knob label i in
    group g (the state metric drops the x = 0 group)."""
    keys, amps, labels = sink.coherent_terms()
    if not len(keys) or not num_labels:
        return np.zeros((num_labels, num_labels))
    inv, first = group_rows(keys)
    if state:
        keep = ~_zero_group(keys, first)[inv]
        inv, amps, labels = inv[keep], amps[keep], labels[keep]
    b = scipy.sparse.coo_matrix((amps, (inv, labels)), shape=(len(first), num_labels)).tocsr()
    a = (b.conj().T @ b).real.toarray()
    return (a + a.T) / 2
