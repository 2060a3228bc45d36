"""Each layer's error terms as local Pauli strings on *sites*, ready to be mapped through a frame.

One operation's error (design.md §2) becomes, in the generator picture (Blume-Kohout et al.,
"A taxonomy of small Markovian errors", PRX Quantum 3, 020335 (2022)):

- coherent terms h_P P from ``NoisyOperation.hamiltonian`` (coherent = exp(-i Σ h_P P), exact);
- stochastic Pauli rates p_P from ``pauli_rates``, from depolarizing λ (each non-identity Pauli at
  λ/d²: ρ -> (1-λ)ρ + λ I/d = (1 - λ + λ/d²) ρ + (λ/d²) Σ_{P≠I} P ρ P), and from T1/T2 relaxation
  through its Pauli twirl (p_x, p_y, p_z; Tomita & Svore, Phys. Rev. A 90, 062320 (2014));
- unit terms: the first-order generator of each coherent knob (``knob_generators``), for the
  quadratic form.

The terms are read from the layer's normal form (:func:`budget.errors.normal_form.layer_errors`).
A *site* is one site of it: an operation's own errors, an idle qubit that relaxes, or a context
error (whose support may overlap the others'; at first order every site of a layer maps through
the frame after the layer's gates, so their order does not matter here). Its four frame rows are
[X_a, X_b, Z_a, Z_b] (2n where the site has one qubit), and a local Pauli is a 4-bit index
v = x_a + 2 x_b + 4 z_a + 8 z_b with phase exponent e0 (the label's Y count): the operator
i^e0 X_a^{x_a} X_b^{x_b} Z_a^{z_a} Z_b^{z_b}. Stochastic rates of a site form one row of 16.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache
from typing import Callable

import numpy as np

from budget.errors.noisy import IDLE, NoisyLayer, NoisyOperation
from budget.errors.normal_form import SiteErrors, hamiltonian, layer_errors, site_stages, stochastic_rates
from budget.pauli_algebra import label_bits


@lru_cache(maxsize=None)
def local_index(label: str) -> tuple[int, int]:
    """(v, e0) of a one- or two-letter Hermitian Pauli label, e.g. ``"XY"`` -> (1 + 2 + 8, 1)."""
    x, z, e = label_bits(label)
    x, z = x + (0,) * (2 - len(x)), z + (0,) * (2 - len(z))
    return x[0] + 2 * x[1] + 4 * z[0] + 8 * z[1], e


@dataclass(frozen=True)
class SiteTerms:
    """Terms on the sites of one layer: site index, local Pauli v, phase e0, coefficient, tag
    (source index for Hamiltonian terms, knob-label index for unit terms)."""

    site: np.ndarray
    v: np.ndarray
    e0: np.ndarray
    coef: np.ndarray
    tag: np.ndarray

    def __len__(self) -> int:
        return len(self.coef)


@dataclass(frozen=True)
class LayerTable:
    """One layer's sites and terms.

    Attributes:
        rows: (S, 4) frame rows of each site.
        source: (S,) source index of each site (every term of a site has the site's source).
        coherent: Hamiltonian terms.
        rates: (S, 16) stochastic rate of each local Pauli (column 0 unused).
        unit: knob unit terms (only when the quadratic form is asked for).
        stage: (S,) stage of each site (:func:`budget.errors.normal_form.site_stages`); None when
            the layer has one stage.
    """

    rows: np.ndarray
    source: np.ndarray
    coherent: SiteTerms
    rates: np.ndarray
    unit: SiteTerms | None = None
    stage: np.ndarray | None = None

    def stages(self, terms: SiteTerms) -> list[np.ndarray] | None:
        """Masks of ``terms`` per stage in time order, or None when the layer has one stage."""
        if self.stage is None:
            return None
        st = self.stage[terms.site]
        return [st == k for k in range(int(self.stage[-1]) + 1) if np.any(st == k)]


def _empty_terms() -> SiteTerms:
    z = np.zeros(0, np.int64)
    return SiteTerms(z, z.astype(np.uint8), z.astype(np.uint8), z.astype(float), z)


@dataclass
class Sources:
    """Registry of error sources: each distinct operation (by object) and each idle qubit.

    ``families[i]`` is source i's family; ``info[i]`` a JSON-ready description for drill-down.
    Knob labels ((family, knob) pairs) for the quadratic form are numbered in ``labels``.
    """

    families: list[str] = field(default_factory=list)
    info: list[dict] = field(default_factory=list)
    index: dict = field(default_factory=dict)
    labels: dict[tuple[str, str], int] = field(default_factory=dict)

    def _add(self, key, family: str, info: dict) -> int:
        if key not in self.index:
            self.index[key] = len(self.families)
            self.families.append(family)
            self.info.append(info)
        return self.index[key]

    def of_operation(self, nop: NoisyOperation, names: tuple[str, ...]) -> int:
        return self._add(
            id(nop),
            nop.family,
            {"family": nop.family, "gate": nop.op.gate, "qubits": [names[q] for q in nop.qubits], "line": nop.op.line},
        )

    def of_idle(self, qubit: int, names: tuple[str, ...]) -> int:
        return self._add((IDLE, qubit), IDLE, {"family": IDLE, "gate": IDLE, "qubits": [names[qubit]], "line": None})


def _row16(rates: dict[str, float]) -> np.ndarray:
    row = np.zeros(16)
    for label, p in rates.items():
        row[local_index(label)[0]] += p
    return row


def _local(items: dict[str, float]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    kept = [(local_index(lab), c) for lab, c in items.items() if c != 0.0]
    v = np.array([a[0] for a, _ in kept], dtype=np.uint8)
    e0 = np.array([a[1] for a, _ in kept], dtype=np.uint8)
    return v, e0, np.array([c for _, c in kept], dtype=float)


class TermBuilder:
    """Builds (and caches per layer object) the site tables of one circuit.

    ``grouping`` (for the quadratic form) maps an operation to its (knob label, unit generator)
    pairs, as :func:`budget.errors.knobs.knob_grouping` does; unit terms are then collected.
    """

    def __init__(self, n: int, names: tuple[str, ...], sources: Sources, grouping: Callable | None = None):
        self.n = n
        self.names = names
        self.sources = sources
        self.grouping = grouping
        self.with_unit = grouping is not None
        self._layers: dict[int, LayerTable] = {}
        self._content: dict[tuple, LayerTable] = {}
        self._alive: list[NoisyLayer] = []  # keeps cached layers alive so their ids stay unique
        self._ops: dict[int, tuple] = {}
        self._idle: dict[tuple, np.ndarray] = {}

    def layer(self, layer: NoisyLayer) -> LayerTable:
        """The layer's table, cached by object and by content (layers written out again and again
        with the same operation objects share one table)."""
        hit = self._layers.get(id(layer))
        if hit is None:
            content = (
                tuple(map(id, layer.sites)),
                len(layer.operations),
                tuple((r.qubit, r.gamma, r.dephasing_factor) for r in layer.idle),
            )
            hit = self._content.get(content)
            if hit is None:
                hit = self._content[content] = self._build(layer)
            self._layers[id(layer)] = hit
            self._alive.append(layer)
        return hit

    def _site(self, errors: SiteErrors) -> tuple:
        """(source, qubit a, qubit b or -1, (v, e0, coef) of the Hamiltonian, 16 rates, unit terms)."""
        nop = errors.source.operation
        if nop is None:
            return self._idle_site(errors)
        hit = self._ops.get(id(nop))
        if hit is not None:
            return hit
        unit = []
        if self.grouping is not None:
            for lab, gen in self.grouping(nop):
                idx = self.sources.labels.setdefault(lab, len(self.sources.labels))
                unit.append((idx,) + _local(gen))
        qs = errors.qubits
        info = (
            self.sources.of_operation(nop, self.names),
            qs[0],
            qs[1] if len(qs) == 2 else -1,
            _local(hamiltonian(errors)),
            _row16(stochastic_rates(errors)),
            unit,
            nop,  # keeps the object alive so its id stays unique
        )
        self._ops[id(nop)] = info
        return info

    def _idle_site(self, errors: SiteErrors) -> tuple:
        (r,) = errors.relaxation
        key = (r.qubit, r.gamma, r.dephasing_factor)
        if key not in self._idle:
            self._idle[key] = (self.sources.of_idle(r.qubit, self.names), r.qubit, -1, _NO_TERMS,
                               _row16(stochastic_rates(errors)), [])
        return self._idle[key]

    def _build(self, layer: NoisyLayer) -> LayerTable:
        n, none = self.n, 2 * self.n
        errors = layer_errors(layer)
        sites = [self._site(e) for e in errors]
        stage = np.array(site_stages(errors), np.int64) if errors else None
        src = np.fromiter((t[0] for t in sites), np.int64, len(sites))
        qa = np.fromiter((t[1] for t in sites), np.int64, len(sites))
        qb = np.fromiter((t[2] for t in sites), np.int64, len(sites))
        rates = np.array([t[4] for t in sites]).reshape(-1, 16)
        rows = np.stack([qa, np.where(qb >= 0, qb, none), n + qa, np.where(qb >= 0, n + qb, none)], axis=1)
        coh = [(s, o[0]) + o[3] for s, o in enumerate(sites) if len(o[3][2])]
        unit = [(s, idx, v, e0, c) for s, o in enumerate(sites) for idx, v, e0, c in o[5]]
        return LayerTable(rows, src, _pack(coh), rates, _pack(unit) if self.with_unit else None,
                          stage if stage is not None and stage[-1] > 0 else None)


_NO_TERMS = _local({})


def _pack(parts: list[tuple]) -> SiteTerms:
    if not parts:
        return _empty_terms()
    counts = [len(p[4]) for p in parts]
    return SiteTerms(
        site=np.repeat(np.array([p[0] for p in parts], np.int64), counts),
        v=np.concatenate([p[2] for p in parts]),
        e0=np.concatenate([p[3] for p in parts]),
        coef=np.concatenate([p[4] for p in parts]),
        tag=np.repeat(np.array([p[1] for p in parts], np.int64), counts),
    )


def term_slots(table: LayerTable, site: np.ndarray, v: np.ndarray, n: int) -> np.ndarray:
    """(T, 4) frame rows of the generators of local Paulis ``v`` on ``site`` (2n where absent),
    for full-bit images."""
    bits = (v[:, None].astype(np.int64) >> np.arange(4)) & 1
    return np.where(bits == 1, table.rows[site], 2 * n)


def stochastic_terms(table: LayerTable) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(site, v, rate) of every non-zero stochastic rate of a layer."""
    site, v = np.nonzero(table.rates)
    return site, v.astype(np.uint8), table.rates[site, v]
