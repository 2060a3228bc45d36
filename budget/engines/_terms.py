"""Each layer's error terms as local Pauli strings, ready to be mapped through a Pauli frame.

One operation's error (design.md §2) becomes, to first order in the generator picture
(Blume-Kohout et al., "A taxonomy of small Markovian errors", PRX Quantum 3, 020335 (2022)):

- coherent terms h_P P from ``NoisyOperation.hamiltonian`` (coherent = exp(-i Σ h_P P), exact);
- stochastic Pauli terms s_P from ``pauli_rates``, from depolarizing λ (each non-identity Pauli at
  λ/d²: ρ -> (1-λ)ρ + λ I/d = (1 - λ + λ/d²) ρ + (λ/d²) Σ_{P≠I} P ρ P), and from T1/T2 relaxation
  through its Pauli twirl (p_x, p_y, p_z; Tomita & Svore, Phys. Rev. A 90, 062320 (2014)), for each
  operation and for each idle slot of the layer;
- unit terms: the first-order generator of each coherent knob (``knob_generators``), for the
  quadratic form.

A term is stored as four frame-row indices [X_a, X_b, Z_a, Z_b] (2n = "not present"), its phase
exponent e0 (the label's Y count), a coefficient and the index of its source (operation or idle
qubit) for shares and drill-down.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from budget.circuit.clifford_check import label_bits
from budget.errors.noisy import IDLE, NoisyLayer, NoisyOperation, Relaxation


@dataclass(frozen=True)
class Terms:
    """A batch of local error terms (see module docstring)."""

    slots: np.ndarray  # (T, 4) int64
    e0: np.ndarray  # (T,) uint8
    coef: np.ndarray  # (T,) float64
    src: np.ndarray  # (T,) int64: source index, or knob-label index for unit terms

    def __len__(self) -> int:
        return len(self.coef)


@dataclass(frozen=True)
class LayerTerms:
    coherent: Terms
    stochastic: Terms
    unit: Terms | None = None


@dataclass
class Sources:
    """Registry of error sources: each distinct operation (by object) and each idle qubit.

    ``families[i]`` is source i's family; ``info[i]`` a JSON-ready description for drill-down.
    Knob labels ((family, knob) pairs) for the quadratic form are registered in ``labels``, with
    ``scale[label]`` the representative knob value the unit terms are measured against.
    """

    families: list[str] = field(default_factory=list)
    info: list[dict] = field(default_factory=list)
    index: dict = field(default_factory=dict)
    labels: dict[tuple[str, str], int] = field(default_factory=dict)
    scale: dict[tuple[str, str], float] = field(default_factory=dict)

    def of_operation(self, nop: NoisyOperation, qubit_names: tuple[str, ...]) -> int:
        key = id(nop)
        if key not in self.index:
            self.index[key] = len(self.families)
            self.families.append(nop.family)
            self.info.append(
                {
                    "family": nop.family,
                    "gate": nop.op.gate,
                    "qubits": [qubit_names[q] for q in nop.qubits],
                    "line": nop.op.line,
                }
            )
        return self.index[key]

    def of_idle(self, qubit: int, qubit_names: tuple[str, ...]) -> int:
        key = (IDLE, qubit)
        if key not in self.index:
            self.index[key] = len(self.families)
            self.families.append(IDLE)
            self.info.append({"family": IDLE, "gate": IDLE, "qubits": [qubit_names[qubit]], "line": None})
        return self.index[key]


def _template(items: dict[str, float], k: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    labels = [lab for lab, c in items.items() if c != 0.0]
    if not labels:
        return np.zeros((0, 2), np.int64), np.zeros((0, 2), np.int64), np.zeros(0, np.uint8), np.zeros(0)
    bits = [label_bits(lab) for lab in labels]
    lx = np.zeros((len(labels), 2), np.int64)
    lz = np.zeros((len(labels), 2), np.int64)
    lx[:, :k] = [b[0] for b in bits]
    lz[:, :k] = [b[1] for b in bits]
    e0 = np.array([b[2] for b in bits], dtype=np.uint8)
    return lx, lz, e0, np.array([items[lab] for lab in labels], dtype=float)


def _all_labels(k: int) -> list[str]:
    out = [""]
    for _ in range(k):
        out = [a + b for a in out for b in "IXYZ"]
    return out[1:]


def twirl_rates(r: Relaxation, k: int, pos: int) -> dict[str, float]:
    """The Pauli-twirled relaxation of one qubit (position ``pos`` of k) as label -> rate."""
    px, py, pz = r.pauli_twirl()
    pad = lambda c: "I" * pos + c + "I" * (k - pos - 1)  # noqa: E731
    return {pad("X"): px, pad("Y"): py, pad("Z"): pz}


def stochastic_rates(nop: NoisyOperation) -> dict[str, float]:
    """Label -> first-order stochastic rate of one operation (Pauli rates + depolarizing + twirl)."""
    k = len(nop.qubits)
    rates: dict[str, float] = {}

    def add(label: str, p: float) -> None:
        rates[label] = rates.get(label, 0.0) + p

    for label, p in nop.pauli_rates.items():
        add(label, p)
    if nop.depolarizing:
        for label in _all_labels(k):
            add(label, nop.depolarizing / 4**k)
    for r in nop.relaxation:
        if not r.is_trivial:
            for label, p in twirl_rates(r, k, nop.qubits.index(r.qubit)).items():
                add(label, p)
    return rates


class TermBuilder:
    """Builds (and caches per layer object) the terms of each layer of one circuit."""

    def __init__(self, n: int, qubit_names: tuple[str, ...], sources: Sources, with_unit: bool = False):
        self.n = n
        self.names = qubit_names
        self.sources = sources
        self.with_unit = with_unit
        self._layers: dict[int, LayerTerms] = {}
        self._templates: dict[tuple, tuple] = {}

    def layer(self, layer: NoisyLayer) -> LayerTerms:
        key = id(layer)
        if key not in self._layers:
            self._layers[key] = self._build(layer)
        return self._layers[key]

    def _cached(self, kind: str, items: dict[str, float], k: int) -> tuple:
        key = (kind, k, tuple(sorted(items.items())))
        if key not in self._templates:
            self._templates[key] = _template(items, k)
        return self._templates[key]

    def _build(self, layer: NoisyLayer) -> LayerTerms:
        coh: list[tuple] = []
        sto: list[tuple] = []
        unit: list[tuple] = []
        for nop in layer.operations:
            k = len(nop.qubits)
            qa = nop.qubits[0]
            qb = nop.qubits[1] if k == 2 else -1
            src = self.sources.of_operation(nop, self.names)
            if nop.hamiltonian:
                coh.append((qa, qb, src) + self._cached("h", nop.hamiltonian, k))
            rates = stochastic_rates(nop)
            if rates:
                sto.append((qa, qb, src) + self._cached("s", rates, k))
            if self.with_unit:
                for knob, gen in nop.knob_generators.items():
                    lab = (nop.family, knob)
                    ref = self.sources.scale.get(lab, 0.0)
                    factor = nop.knob_values.get(knob, 0.0) / ref if ref else 1.0
                    if factor == 0.0:
                        continue
                    idx = self.sources.labels.setdefault(lab, len(self.sources.labels))
                    scaled = {p: c * factor for p, c in gen.items()}
                    unit.append((qa, qb, idx) + _template(scaled, k))
        for r in layer.idle:
            if not r.is_trivial:
                src = self.sources.of_idle(r.qubit, self.names)
                sto.append((r.qubit, -1, src) + self._cached("s", twirl_rates(r, 1, 0), 1))
        return LayerTerms(self._pack(coh), self._pack(sto), self._pack(unit) if self.with_unit else None)

    def _pack(self, parts: list[tuple]) -> Terms:
        none = 2 * self.n
        if not parts:
            return Terms(np.zeros((0, 4), np.int64), np.zeros(0, np.uint8), np.zeros(0), np.zeros(0, np.int64))
        counts = np.array([len(p[6]) for p in parts])
        qa = np.repeat([p[0] for p in parts], counts)
        qb = np.repeat([p[1] for p in parts], counts)
        src = np.repeat([p[2] for p in parts], counts)
        lx = np.concatenate([p[3] for p in parts])
        lz = np.concatenate([p[4] for p in parts])
        slots = np.empty((len(qa), 4), np.int64)
        slots[:, 0] = np.where(lx[:, 0] == 1, qa, none)
        slots[:, 1] = np.where(lx[:, 1] == 1, qb, none)
        slots[:, 2] = np.where(lz[:, 0] == 1, self.n + qa, none)
        slots[:, 3] = np.where(lz[:, 1] == 1, self.n + qb, none)
        e0 = np.concatenate([p[5] for p in parts])
        coef = np.concatenate([p[6] for p in parts])
        return Terms(slots, e0, coef, src.astype(np.int64))
