"""What the Pauli engine needs from one noisy layer, built once per distinct layer object.

- gate classes: the layer's gates grouped by equal transfer matrix (:func:`_local.gate_map`), each
  with the qubit arrays it acts on; identity gates left out;
- coherent rows: each operation's Hamiltonian Σ h_P P as store rows, one column per group (gate
  family for budgets and shares, (family, knob) for the quadratic form);
- jump sites (state metric): each operation's and idle qubit's jump operators L at probability p,
  exactly those of the generators engine (:func:`budget.errors.normal_form.operation_jumps`: Pauli
  rates, depolarizing λ/d² per Pauli, σ- at γ and Z at (1-c)/2 for relaxation), written in the local
  Pauli basis: L = Σ_v l_v P_v, L†L = Σ_v m_v P_v;
- generator sites (observables): the local Heisenberg generator i[H, ·] + Σ p (L† · L - ½{L†L, ·});
- process stochastic part per family (Σ p over Pauli rates, relaxation through its Pauli twirl,
  Tomita & Svore, PRA 90, 062320 (2014)), as the generators engine counts it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from budget.engines.pauli._local import LocalMap, gate_map, generator_map, local_basis, local_label
from budget.engines.pauli._rotate import qubit_mask, rotation_axis
from budget.engines.pauli._store import Store, from_local
from budget.errors.noisy import IDLE, NoisyLayer, NoisyOperation
from budget.errors.normal_form import operation_jumps, operation_stochastic, relaxation_jumps
from budget.memo import ObjectKey

Grouping = Callable[[NoisyOperation], list[tuple[object, dict[str, float]]]]


@dataclass(frozen=True)
class GateClass:
    """Gates of one layer with equal transfer matrix: qubits, and for one-qubit rotations about a
    Pauli axis that axis and the qubit mask (:mod:`budget.engines.pauli._rotate`)."""

    lmap: LocalMap
    qa: np.ndarray
    qb: np.ndarray | None
    axis: int | None = None
    mask: np.ndarray | None = None


@dataclass(frozen=True)
class JumpSite:
    """Jump operators of one site in the local Pauli basis (see module docstring).

    Attributes:
        qa, qb: the site's qubits (qb = -1 for one qubit).
        family: the family the cost is booked to.
        rates: (J,) probabilities p.
        decay: (J, 4^k) real coefficients m_v of L†L.
        amp_re, amp_im: (J, 4^k) coefficients l_v of L.
        needed: local indices v ≠ 0 whose expectation value is needed.
        weight: (len(needed),) how strongly an error in <P_v> moves the cost (truncation threshold).
        top: (J,) largest eigenvalue of each L†L (each jump's cost lies in [0, p · top]).
    """

    qa: int
    qb: int
    family: str
    rates: np.ndarray
    decay: np.ndarray
    amp_re: np.ndarray
    amp_im: np.ndarray
    needed: np.ndarray
    weight: np.ndarray
    top: np.ndarray


@dataclass(frozen=True)
class LayerPlan:
    classes: tuple[GateClass, ...]
    coherent: Store
    jump_sites: tuple[JumpSite, ...]
    gen_qa: np.ndarray
    gen_qb: np.ndarray
    gen_maps: tuple[np.ndarray, ...]
    kappa: float
    stochastic: dict[str, float]

    @property
    def clifford(self) -> bool:
        return all(c.lmap.clifford for c in self.classes)


def _decompose(ops: np.ndarray, k: int) -> np.ndarray:
    """(J, 4^k) complex coefficients c_v with op = Σ c_v P_v."""
    basis = local_basis(k)
    return np.einsum("vij,Jji->Jv", basis, ops) / 2**k


def _jump_site(qa: int, qb: int, family: str, items: list[tuple[np.ndarray, float]]) -> JumpSite | None:
    items = [(m, p) for m, p in items if p > 0]
    if not items:
        return None
    k = 1 if qb < 0 else 2
    ops = np.array([m for m, _ in items], complex)
    lam = _decompose(ops, k)
    dec = _decompose(np.conj(np.swapaxes(ops, 1, 2)) @ ops, k).real
    rates = np.array([p for _, p in items])
    nz = (np.abs(lam) > 1e-15) | (np.abs(dec) > 1e-15)
    needed = np.nonzero(nz[:, 1:].any(axis=0))[0] + 1
    absl = np.abs(lam)
    w = (rates[:, None] * (np.abs(dec) + 2 * absl * absl.sum(axis=1, keepdims=True))).sum(axis=0)
    top = np.linalg.eigvalsh(np.conj(np.swapaxes(ops, 1, 2)) @ ops)[:, -1]
    return JumpSite(qa, qb, family, rates, dec, lam.real.copy(), lam.imag.copy(), needed, w[needed], top)


class PlanBook:
    """Layer plans for one circuit, one direction and one grouping of coherent terms.

    Args:
        n: qubits.
        direction: ``"pull"`` (towards the input) or ``"push"`` (towards the output).
        grouping: operation -> (group key, Pauli generator) pairs (columns of the coherent store).
        columns: group key -> column index.
        jumps, generators: build jump sites (state metric) / generator sites (observables).
        coherent_generators: the generator sites carry i[H, ·] (False: the incoherent part only, the
            engine then adds the coherent change beyond first order, :mod:`budget.engines.pauli._observe`).
    """

    def __init__(self, n: int, direction: str, grouping: Grouping, columns: dict, *, jumps: bool, generators: bool,
                 coherent_generators: bool = True):
        self.n, self.direction, self.grouping, self.columns = n, direction, grouping, columns
        self.jumps, self.generators = jumps, generators
        self.coherent_generators = coherent_generators
        self._plans: dict[ObjectKey, LayerPlan] = {}
        self._gen_cache: dict[ObjectKey, tuple[np.ndarray, float]] = {}

    def __call__(self, layer: NoisyLayer) -> LayerPlan:
        key = ObjectKey(layer)
        hit = self._plans.get(key)
        if hit is None:
            hit = self._plans[key] = self._build(layer)
        return hit

    def _classes(self, layer: NoisyLayer) -> tuple[GateClass, ...]:
        groups: dict[ObjectKey, tuple[LocalMap, list]] = {}
        for nop in layer.operations:
            op = nop.op
            key = (op.gate, op.params) if op.matrix is None else None
            lmap = gate_map(op.unitary(), self.direction, key)
            if np.array_equal(lmap.matrix, np.eye(lmap.matrix.shape[0])):
                continue
            groups.setdefault(ObjectKey(lmap), (lmap, []))[1].append(op.qubits)
        out = []
        for lmap, qs in groups.values():
            arr = np.array(qs, np.int64).reshape(len(qs), -1)
            qa, qb = arr[:, 0].copy(), (arr[:, 1].copy() if arr.shape[1] == 2 else None)
            axis = None if lmap.clifford or qb is not None else rotation_axis(lmap.matrix)
            out.append(GateClass(lmap, qa, qb, axis, None if axis is None else qubit_mask(self.n, qa)))
        return tuple(out)

    def _coherent(self, layer: NoisyLayer) -> Store:
        qa, qb, v, key, rows = [], [], [], [], []
        width = len(self.columns)
        for nop in layer.sites:  # the operations', then the context errors' terms (normal form order)
            qs = nop.qubits
            for group, h in self.grouping(nop):
                col = self.columns[group]
                for label, c in h.items():
                    if c == 0.0:
                        continue
                    row = np.zeros(width)
                    row[col] = c
                    qa.append(qs[0])
                    qb.append(qs[1] if len(qs) == 2 else -1)
                    v.append(local_label(label))
                    rows.append(row)
        if not rows:
            return Store.empty(self.n, width)
        t = len(rows)
        return from_local(self.n, np.array(qa), np.array(qb), np.array(v), np.zeros(t, np.int64), np.array(rows))

    def _generator(self, nop: NoisyOperation) -> tuple[np.ndarray, float]:
        hit = self._gen_cache.get(ObjectKey(nop))
        if hit is None:
            jumps = operation_jumps(nop)
            m = generator_map(nop.hamiltonian if self.coherent_generators else {}, jumps, len(nop.qubits))
            kappa = 2 * sum(abs(c) for c in nop.hamiltonian.values()) + 2 * sum(p for _, p in jumps)
            hit = self._gen_cache[ObjectKey(nop)] = (m, kappa)
        return hit

    def _build(self, layer: NoisyLayer) -> LayerPlan:
        sites: list[JumpSite] = []
        gen_qa, gen_qb, gen_maps = [], [], []
        kappa = 0.0
        stoch: dict[str, float] = {}
        for nop in layer.sites:  # the operations, then the context errors (normal form order)
            qs = nop.qubits
            qa, qb = qs[0], (qs[1] if len(qs) == 2 else -1)
            if s := operation_stochastic(nop):
                stoch[nop.family] = stoch.get(nop.family, 0.0) + s
            if self.jumps and (site := _jump_site(qa, qb, nop.family, operation_jumps(nop))) is not None:
                sites.append(site)
            if self.generators and (nop.hamiltonian or nop.has_incoherent):
                m, kap = self._generator(nop)
                kappa += kap  # the coherent part counts in the bound even when added apart
                if self.coherent_generators or nop.has_incoherent:
                    gen_qa.append(qa)
                    gen_qb.append(qb)
                    gen_maps.append(m)
        for r in layer.idle:
            if r.is_trivial:
                continue
            stoch[IDLE] = stoch.get(IDLE, 0.0) + sum(r.pauli_twirl())
            items = relaxation_jumps(r)
            if self.jumps and (site := _jump_site(r.qubit, -1, IDLE, items)) is not None:
                sites.append(site)
            if self.generators:
                gen_qa.append(r.qubit)
                gen_qb.append(-1)
                gen_maps.append(generator_map({}, items, 1))
                kappa += 2 * sum(p for _, p in items)
        return LayerPlan(
            self._classes(layer),
            self._coherent(layer),
            tuple(sites),
            np.array(gen_qa, np.int64),
            np.array(gen_qb, np.int64),
            tuple(gen_maps),
            kappa,
            stoch,
        )
