"""Sum coherent amplitudes within groups of equal Pauli keys; totals, shares, resummation.

Within a group every term is the same Pauli (process metric) or acts the same way on |0…0> (state
metric), so amplitudes add: A_g = Σ_{t∈g} a_t, and the group contributes |A_g|² to first order
(Blume-Kohout et al., PRX Quantum 3, 020335 (2022)). Term t's share is Re(conj(a_t) A_g); the
shares of a group add up to |A_g|² and can be negative (a term that cancels the others).

Resummed coherent part. All terms of a group commute, so a group alone is exactly exp(-i A_g Q_g):
it costs sin²|A_g| of fidelity (process metric: |Tr e^{-iAQ}/d|² = cos² A; state metric: the group
only mixes |0…0> with |x>, giving cos²|A_x|). Treating groups as independent, the coherent
infidelity is 1 - Π_g cos²|A_g|: exact when the groups commute and share no products, correct to
second order otherwise. As in the generators engine, the reported total is this resummed coherent
part plus the first-order stochastic part, and the coherent shares are scaled by
resummed / first-order so that the family shares add up to the total.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse

from budget.engines.frame.rows import group_rows
from budget.engines.frame.sinks import GroupSink
from budget.engines.base import EngineResult
from budget.engines.details import Details

SMALL = 0.1
"""First-order infidelity above which the engines warn that the expansion is no longer small."""

@dataclass(frozen=True)
class Budget:
    """First-order and resummed totals of one metric, with per-source shares.

    Attributes:
        coherent, stochastic: first-order parts (Σ |A_g|², Σ counted p).
        coherent_resummed: 1 - Π cos²|A_g|.
        coherent_shares, stochastic_shares: first-order share of each source (they add up to
            coherent and stochastic).
        groups: number of distinct coherent groups with a non-zero sum (zero group excluded in the
            state metric).
        max_amplitude: largest |A_g| in radians.
    """

    coherent: float
    stochastic: float
    coherent_resummed: float
    coherent_shares: np.ndarray
    stochastic_shares: np.ndarray
    groups: int
    max_amplitude: float

    @property
    def first_order(self) -> float:
        return self.coherent + self.stochastic

    @property
    def first_order_shares(self) -> np.ndarray:
        return self.coherent_shares + self.stochastic_shares

    @property
    def total(self) -> float:
        """Resummed coherent + first-order stochastic, clipped to [0, 1]."""
        return float(np.clip(self.coherent_resummed + self.stochastic, 0.0, 1.0))

    @property
    def shares(self) -> np.ndarray:
        """Per-source shares of :attr:`total` (coherent shares scaled by resummed / first order)."""
        scale = self.coherent_resummed / self.coherent if self.coherent > 0 else 0.0
        raw = scale * self.coherent_shares + self.stochastic_shares
        s = raw.sum()
        return raw * (self.total / s) if s and abs(s - self.total) > 1e-15 else raw


def size_warning(b: "Budget") -> list[str]:
    """The warning of a first-order budget that is no longer small (empty when it is)."""
    if b.first_order <= SMALL and b.max_amplitude <= np.sqrt(SMALL):
        return []
    return [
        f"first-order infidelity {b.first_order:.3g} is no longer small (largest summed coherent amplitude "
        f"{b.max_amplitude:.3g} rad): the resummed value {b.total:.3g} treats error groups as "
        "independent; check with the exact engine where it fits"
    ]


def budget_result(name: str, metric: str, b: "Budget", shares: dict, warnings: list[str], details: Details, observables: dict) -> EngineResult:
    """The :class:`EngineResult` of a resummed first-order budget (clifford and pauli engines);
    beyond range when the resummed coherent part plus the incoherent sum exceeds 1."""
    beyond = None
    raw = b.coherent_resummed + b.stochastic
    if raw > 1.0:  # the resummed coherent part plus the incoherent sum is no probability any more
        beyond = (f"resummed coherent part {b.coherent_resummed:.3g} plus the first-order sum of incoherent "
                  f"errors {b.stochastic:.3g} make {raw:.3g}, {raw:.3g}x the largest possible infidelity")
    return EngineResult(
        engine=name,
        metric=metric,
        infidelity=float(min(max(b.total, 0.0), 1.0)),
        shares=shares,
        first_order=float(b.first_order),
        warnings=tuple(dict.fromkeys(warnings)),
        details=details,
        observable_errors=observables,
        beyond_range=beyond,
    )


def _zero_group(keys: np.ndarray, first: np.ndarray) -> np.ndarray:
    return ~np.any(keys[first] != 0, axis=1)


BUCKET_TERMS = 2_000_000
"""Coherent terms grouped at once; larger sets are split by fingerprint bits (less peak memory)."""


def _buckets(sink: GroupSink) -> int:
    parts = 1
    while parts * BUCKET_TERMS < sink.num_terms and parts < 256:
        parts *= 2
    return parts


def aggregate(sink: GroupSink, num_sources: int, *, state: bool) -> Budget:
    """Totals from a filled :class:`GroupSink` (``state`` drops the x = 0 group: <H>, no variance)."""
    coherent = log_f = max_amp = 0.0
    groups = 0
    shares = np.zeros(num_sources)
    parts = _buckets(sink)
    for part in range(parts):
        keys, amps, src = sink.coherent_terms(part, parts)
        inv, first = group_rows(keys)
        amp_g = np.bincount(inv, weights=amps.real, minlength=len(first)) + 1j * np.bincount(
            inv, weights=amps.imag, minlength=len(first)
        )
        if state and len(first):
            amp_g[_zero_group(keys, first)] = 0.0
        mag = np.abs(amp_g)
        shares += np.bincount(src, weights=np.real(np.conj(amps) * amp_g[inv]), minlength=num_sources)
        coherent += float(np.sum(mag**2))
        cos2 = np.cos(np.minimum(mag, np.pi / 2)) ** 2
        log_f += float(np.sum(np.log(cos2))) if np.all(cos2 > 0) else -np.inf
        groups += int(np.count_nonzero(mag))
        max_amp = max(max_amp, float(mag.max()) if len(mag) else 0.0)
    for fb in sink.folded:  # runs of equal amplitude from blocks folded by orbits
        amp_g = fb.w @ fb.amps
        mag = np.abs(amp_g)
        shares += np.bincount(fb.tags, weights=fb.amps * (fb.w.T @ (fb.lens * amp_g)), minlength=num_sources)
        coherent += float(fb.lens @ mag**2)
        cos2 = np.cos(np.minimum(mag, np.pi / 2)) ** 2
        log_f += float(fb.lens @ np.log(cos2)) if np.all(cos2 > 0) else -np.inf
        groups += int(fb.lens[mag > 0].sum())
        max_amp = max(max_amp, float(mag.max()) if len(mag) else 0.0)
    sto = sink.stochastic_by_source(num_sources)
    return Budget(
        coherent=coherent,
        stochastic=float(np.sum(sto)),
        coherent_resummed=float(-np.expm1(log_f)),
        coherent_shares=shares,
        stochastic_shares=sto,
        groups=groups,
        max_amplitude=max_amp,
    )


def quadratic_matrix(sink: GroupSink, num_labels: int, *, state: bool) -> np.ndarray:
    """A_{ij} = Σ_g Re(conj(B_{g i}) B_{g j}), B_{g i} the summed unit amplitude of knob label i in
    group g (the state metric drops the x = 0 group)."""
    a = np.zeros((num_labels, num_labels))
    parts = _buckets(sink)
    for part in range(parts):
        keys, amps, labels = sink.coherent_terms(part, parts)
        if not len(keys) or not num_labels:
            continue
        inv, first = group_rows(keys)
        if state:
            keep = ~_zero_group(keys, first)[inv]
            inv, amps, labels = inv[keep], amps[keep], labels[keep]
        b = scipy.sparse.coo_matrix((amps, (inv, labels)), shape=(len(first), num_labels)).tocsr()
        a += (b.conj().T @ b).real.toarray()
    for fb in sink.folded:  # B_g = Σ_t w_gt amps_t e_label(t), each run counted lens_g times
        per_label = scipy.sparse.csr_matrix((fb.amps, (np.arange(len(fb.amps)), fb.tags)), shape=(len(fb.amps), num_labels))
        b = fb.w @ per_label
        a += (b.T @ scipy.sparse.diags(fb.lens) @ b).toarray()
    return (a + a.T) / 2
