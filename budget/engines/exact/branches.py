"""Density matrix with classical branches: the exact reference for circuits with measurements.

The state is a stack of unnormalised density matrices ρ_k, one per *key* k: the classical values
that later steps still need. A measurement of qubit q splits every branch into the projected parts
P_b ρ P_b (b = 0, 1; the post-measurement state is the projected one), and the recorded bit r is b
flipped with the readout error e, so branch (b, r) carries weight (1 - e) or e; the key then takes
r. A reset maps ρ to Σ_b |0><b| ρ |b><0| and leaves |1> with the reset error. An if block runs its
branch on the branches whose key holds the value. Branches with equal keys are merged (summed), so
the stack never holds more than 2^(tracked bits) matrices.

What the key tracks (Nielsen & Chuang, "Quantum Computation and Quantum Information", 2000, §2.4
and §8.3 for measurement and operations with classical outcomes):

- the latest recorded value of every bit an if block reads;
- for the detector metric, the running parity of each open detector; when its last measurement is
  made, its firing probability is read off and the parity folds into one "some detector fired" bit;
- for the record metric, every recorded bit (the joint record distribution).

Cost: O(B · 4^n) memory for B live branches; limits in :data:`MAX_QUBITS` and :data:`MAX_KEY_BITS`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from budget.circuit.walk import Kind, counted, kind_of
from budget.errors.fidelity import site_kraus
from budget.errors.normal_form import layer_errors
from budget.errors.noisy import NoisyCircuit, NoisyIf, NoisyLayer
from budget.memo import ObjectKey

MAX_QUBITS = 10
MAX_KEY_BITS = 20
MAX_BYTES = 2 * 1024**3
"""Largest stack of density matrices (live branches x 4^n x 16 bytes)."""
MAX_STEPS = 200_000
"""Largest number of executed items (repeats are unrolled here)."""

_P = (np.diag([1.0, 0.0]).astype(complex), np.diag([0.0, 1.0]).astype(complex))
_RESET = (np.array([[1, 0], [0, 0]], complex), np.array([[0, 1], [0, 0]], complex))
_X = np.array([[0, 1], [1, 0]], complex)


@dataclass(frozen=True)
class Plan:
    """What the key tracks.

    Attributes:
        detectors: record indices of each detector (empty for the record metric).
        ideal: ideal value of each detector.
        record: track every record bit (the record metric).
        condition_bits: the bit names that if blocks read.
        num_measurements: the record length.
    """

    detectors: tuple[tuple[int, ...], ...]
    ideal: tuple[int, ...]
    record: bool
    condition_bits: tuple[str, ...]
    num_measurements: int


@dataclass(frozen=True)
class BranchResult:
    """Per-detector firing probabilities, P(some detector fires), or the record distribution."""

    detector_probability: tuple[float, ...]
    any_fires: float
    record: dict[int, float]


def condition_bits(items) -> list[str]:
    """Every bit name an if block reads (in order of first appearance)."""
    out: list[str] = []

    for it, _ in counted(items, where="condition_bits"):
        if it.kind is Kind.IF:
            out.extend(b for b in it.item.bits if b not in out)
    return out


def key_bits_needed(plan: Plan) -> int:
    """Largest number of key bits alive at once (worst case, a bound used by ``fits``)."""
    if plan.record:
        return plan.num_measurements + len(plan.condition_bits)
    ends = [max(d) for d in plan.detectors]
    starts = [min(d) for d in plan.detectors]
    open_at = max((sum(1 for s, e in zip(starts, ends) if s <= j <= e) for j in range(plan.num_measurements)), default=0)
    return open_at + 1 + len(plan.condition_bits)


class _Sim:
    def __init__(self, circuit: NoisyCircuit, plan: Plan):
        self.n = circuit.num_qubits
        self.plan = plan
        self.rho = np.zeros((1,) + (2,) * (2 * self.n), dtype=complex)
        self.rho[(0,) + (0,) * (2 * self.n)] = 1.0
        self.keys = np.zeros(1, dtype=np.int64)
        self.j = 0  # record index of the next measurement
        self.steps = 0
        self.cond_slot = {b: k for k, b in enumerate(plan.condition_bits)}
        base = len(plan.condition_bits)
        self.any_slot = base
        self.free = list(range(base + 1, 63))
        self.det_slot: dict[int, int] = {}
        self.det_of: dict[int, list[int]] = {}
        self.last_of: dict[int, list[int]] = {}
        for k, ms in enumerate(plan.detectors):
            for i in ms:
                self.det_of.setdefault(i, []).append(k)
            self.last_of.setdefault(max(ms), []).append(k)
        self.det_prob = [0.0] * len(plan.detectors)
        self.kraus_cache: dict[ObjectKey, list[np.ndarray]] = {}
        self.superops: dict[object, np.ndarray] = {}

    # -- linear algebra on the stack -------------------------------------------------------------
    def apply(self, kraus: list[np.ndarray], qubits: tuple[int, ...], key: object = None) -> np.ndarray:
        """Σ_K K ρ K† on ``qubits`` for every branch, as one contraction with the superoperator
        S = Σ_K K ⊗ K̄ (cached under ``key``)."""
        k = len(qubits)
        sup = self.superops.get(key) if key is not None else None
        if sup is None:
            sup = sum(np.kron(K, K.conj()) for K in kraus).reshape((2,) * (4 * k))
            if key is not None:
                self.superops[key] = sup
        axes = [1 + q for q in qubits] + [1 + self.n + q for q in qubits]
        out = np.tensordot(sup, self.rho, axes=(list(range(2 * k, 4 * k)), axes))
        return np.moveaxis(out, list(range(2 * k)), axes)

    def merge(self) -> None:
        uniq, inv = np.unique(self.keys, return_inverse=True)
        merged = np.zeros((len(uniq),) + self.rho.shape[1:], dtype=complex)
        np.add.at(merged, inv, self.rho)
        self.rho = merged
        self.keys = uniq
        if self.rho.nbytes > MAX_BYTES:
            raise MemoryError(f"{len(self.keys)} branches of a {self.n}-qubit density matrix exceed {MAX_BYTES} bytes")

    def weights(self) -> np.ndarray:
        d = 2**self.n
        return np.real(np.einsum("bii->b", self.rho.reshape(len(self.keys), d, d)))

    # -- items ---------------------------------------------------------------------------------
    def items(self, items) -> None:
        for it in items:
            self.steps += 1
            if self.steps > MAX_STEPS:
                raise MemoryError(f"more than {MAX_STEPS} executed items")
            kind = kind_of(it, "exact engine (measurement branches)")
            if kind is Kind.LAYER:
                self.layer(it)
            elif kind is Kind.MEASURE:
                self.idle(it.idle)
                for q, bit, e in zip(it.item.qubits, it.item.bits, it.readout_error):
                    self.measure(q, bit, e)
            elif kind is Kind.RESET:
                self.idle(it.idle)
                for q, e in zip(it.item.qubits, it.reset_error):
                    self.rho = self.apply(list(_RESET), (q,), "reset")
                    if e:
                        self.rho = self.apply([np.sqrt(1 - e) * np.eye(2), np.sqrt(e) * _X], (q,), ("flip", e))
            elif kind is Kind.REPEAT:
                for _ in range(it.count):
                    self.items(it.body)
            else:  # Kind.IF
                self.branch(it)

    def layer(self, layer: NoisyLayer) -> None:
        """Each site of the layer's normal form in channel order (site i after the ideal gate of
        operation i; idle relaxation and context errors after the gates)."""
        ops = layer.operations
        for i, errors in enumerate(layer_errors(layer)):
            if errors.source.operation is None:  # idle relaxation
                self.idle(errors.relaxation)
                continue
            key = ObjectKey(errors.source.operation)
            if key not in self.kraus_cache:
                kraus = site_kraus(errors)
                self.kraus_cache[key] = [k @ ops[i].op.unitary() for k in kraus] if i < len(ops) else kraus
            self.rho = self.apply(self.kraus_cache[key], errors.qubits, key)

    def idle(self, relax) -> None:
        for r in relax:
            if not r.is_trivial:
                self.rho = self.apply(r.kraus(), (r.qubit,), ObjectKey(r))

    def measure(self, q: int, bit: str, e: float) -> None:
        parts, keys = [], []
        j = self.j
        self.j += 1
        flip = 0
        for k in self.det_of.get(j, []):
            if k not in self.det_slot:
                self.det_slot[k] = self.free.pop(0)
            flip |= 1 << self.det_slot[k]
        if self.plan.record:
            flip |= 1 << (len(self.plan.condition_bits) + 1 + j)
        clear = (1 << self.cond_slot[bit]) if bit in self.cond_slot else 0
        for b in (0, 1):
            projected = self.apply([_P[b]], (q,), ("project", b))
            for r, w in ((b, 1 - e), (1 - b, e)):
                if w == 0:
                    continue
                parts.append(projected * w)
                k = self.keys & ~clear
                if r:
                    k = k ^ flip | clear
                keys.append(k)
        self.rho = np.concatenate(parts)
        self.keys = np.concatenate(keys)
        for k in self.last_of.get(j, []):
            self.close(k)
        self.merge()

    def close(self, k: int) -> None:
        """Read detector k's firing probability and fold it into the 'some detector fired' bit."""
        slot = self.det_slot.pop(k)
        fired = ((self.keys >> slot) & 1) != self.plan.ideal[k]
        w = self.weights()
        self.det_prob[k] = float(np.sum(w[fired]))
        self.keys = (self.keys & ~(1 << slot)) | (fired.astype(np.int64) << self.any_slot)
        self.free.insert(0, slot)

    def branch(self, it: NoisyIf) -> None:
        value = 0
        for pos, b in enumerate(it.item.bits):
            value |= ((self.keys >> self.cond_slot[b]) & 1) << pos
        take = value == it.item.value
        parts_rho, parts_keys = [], []
        j0 = self.j
        for mask, body in ((take, it.then), (~take, it.orelse)):
            if not mask.any():
                continue
            sub = _Sim.__new__(_Sim)
            sub.__dict__.update(self.__dict__)
            sub.rho, sub.keys, sub.j = self.rho[mask], self.keys[mask], j0
            sub.items(body)
            parts_rho.append(sub.rho)
            parts_keys.append(sub.keys)
            self.steps = sub.steps
        self.rho = np.concatenate(parts_rho)
        self.keys = np.concatenate(parts_keys)
        self.merge()


def simulate(circuit: NoisyCircuit, plan: Plan) -> BranchResult:
    """Run the circuit on |0…0> with classical branches (see the module docstring)."""
    sim = _Sim(circuit, plan)
    sim.items(circuit.body)
    w = sim.weights()
    total = float(np.sum(w))
    if plan.record:
        shift = len(plan.condition_bits) + 1
        dist: dict[int, float] = {}
        for key, p in zip(sim.keys, w):
            r = int(key) >> shift
            dist[r] = dist.get(r, 0.0) + float(p) / total
        return BranchResult((), 0.0, dist)
    fired = ((sim.keys >> sim.any_slot) & 1).astype(bool)
    return BranchResult(tuple(p / total for p in sim.det_prob), float(np.sum(w[fired])) / total, {})
