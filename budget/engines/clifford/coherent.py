"""Coherent errors on the detector path: amplitudes that flip the same detectors add (first order).

Deferred measurement (Nielsen & Chuang 2000, §4.4) turns the circuit into one Clifford unitary U
on the qubits plus one fresh ancilla per recorded bit and per reset, all starting in |0…0>: a
measurement of q is a CNOT from q onto its ancilla (the record is the ancillas' final Z values), a
reset is a CNOT from q onto a fresh ancilla and back, a Pauli feed-forward is a controlled Pauli from
the ancilla that holds the bit. Every detector D (a parity of record bits) is then a Z-parity on
ancillas, deterministic on U|0…0>.

A coherent error exp(-i Σ h_P P) after an operation at time t is, to first order, the sum
-i Σ h_P P. Pulled back to the input, P becomes P̃ = U_t† P U_t (U_t: the circuit up to t), a
Pauli string whose action on |0…0> is c |x> (x: its X part; c = sign · i^{#Y}). The state after all
errors is U (1 - i Σ_k h_k c_k |x_k>) to first order, so

    P(syndrome s) = Σ_{x: syndrome(x) = s} |A_x|²,   A_x = Σ_{k: x_k = x} h_k c_k,

where syndrome(x) is the set of detectors D whose pull-back D̃ = U† D U (a Z-type string) has odd
overlap with x. Terms add in amplitude exactly when they act alike on the input, which is the
precise form of the rules in design.md §8: within a round, errors that flip the same detectors
through the same operator interfere (an error and the same error times a stabilizer of the state
with a fixed sign: h₁ ± h₂); an error that a measurement sees leaves an X on that measurement's
ancilla, so it no longer interferes with the errors of later rounds (the check projects it); an
error that no check sees keeps its x from round to round and builds up coherently. Each class x is
given the probability sin²|A_x| (exact for a single Pauli string, = |A_x|² to first order) and is
combined with the incoherent mechanisms as an independent mechanism (:mod:`frames`).

This is the state-metric grouping of the clifford engine (group by X part, design.md §4) applied to
the deferred-measurement circuit; syndrome-resolved coherent noise follows Beale, Wallman,
Gutiérrez, Brown & Laflamme, "Quantum error correction decoheres noise", PRL 121, 190501 (2018).
A family's part of a class is Re(conj(A_x) A_x,f)/|A_x|² of its probability (the parts add up).
Cost: one stabilizer simulation of n + (recorded bits) + (resets) qubits, unrolled; the folded path
(:mod:`budget.analysis.folding`) keeps it at a few rounds.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import stim

from budget.engines.clifford.stim_circuit import Conditioned, as_pauli, to_stim
from budget.errors.noisy import IDLE, NoisyCircuit, NoisyLayer, NoisyMeasure, NoisyReset
from budget.errors.normal_form import layer_errors
from budget.memo import ObjectKey
from budget.pauli_algebra import commutes

MAX_DEFERRED_QUBITS = 16_000
"""Largest deferred-measurement register simulated (its tableau holds (2n)² bits: 128 MB here)."""

_MARK = "DETECTOR"
"""A target-less DETECTOR with one coordinate marks where a layer's coherent errors sit (stim
ignores it when simulating; the coordinate is the layer's index in the marker list)."""


@dataclass(frozen=True)
class CoherentClass:
    """Error terms with the same action x on the deferred input state.

    Attributes:
        detectors: indices of the detectors the class flips (ascending).
        probability: sin²|A| with A the summed amplitude.
        family_parts: family -> its part of ``probability`` (may be negative: interference).
    """

    detectors: tuple[int, ...]
    probability: float
    family_parts: dict[str, float]


def coherent_classes(circuit: NoisyCircuit, detectors: tuple[tuple[int, ...], ...]) -> list[CoherentClass] | None:
    """The coherent error classes of ``circuit`` and its relaxation jumps (see the module
    docstring); detectors are record index lists. Coherent errors of gates under an if block are
    included as errors conditioned on the bit (:meth:`_Classes.conditioned`), their incoherent
    errors are not. None when the deferred register exceeds :data:`MAX_DEFERRED_QUBITS` (the
    caller twirls)."""
    items: list = []
    index: dict = {}

    def mark(out, item) -> None:
        if _has_amplitudes(item):
            key = (ObjectKey(item.item), item.lookback, item.want) if isinstance(item, Conditioned) else ObjectKey(item)
            if key not in index:
                index[key] = len(items)
                items.append(item)
            out.append(_MARK, [], [index[key]])

    program = to_stim(circuit, mark).flattened()
    if not items:
        return []
    n = circuit.num_qubits
    total = n + sum(len(inst.targets_copy()) for inst in program if inst.name in ("M", "R"))
    if total > MAX_DEFERRED_QUBITS:
        return None
    sim = stim.TableauSimulator()
    sim.set_num_qubits(total)
    ancilla: list[int] = []  # record index -> its ancilla
    fresh = n
    chunk = stim.Circuit()
    acc = _Classes()
    for inst in program:
        name = inst.name
        targets = inst.targets_copy()
        if name == "M":
            for t in targets:
                chunk.append("CX", [t.value, fresh])
                ancilla.append(fresh)
                fresh += 1
        elif name == "R":
            for t in targets:
                chunk.append("CX", [t.value, fresh, fresh, t.value])
                fresh += 1
        elif name == _MARK and not targets:
            sim.do(chunk)
            chunk = stim.Circuit()
            acc.add(sim.current_inverse_tableau(), items[int(inst.gate_args_copy()[0])], total, ancilla)
        elif any(t.is_measurement_record_target for t in targets):
            fixed = []
            for t in targets:
                fixed.append(ancilla[len(ancilla) + t.value] if t.is_measurement_record_target else t.value)
            chunk.append(name, fixed)
        else:
            chunk.append(inst)
    sim.do(chunk)
    entries = acc.entries()
    rows = np.concatenate([np.flatnonzero(xs) for xs, _, _ in entries]) if entries else np.zeros(0, int)
    ptr = np.cumsum([0] + [int(xs.sum()) for xs, _, _ in entries])
    x_mat = sp.csr_matrix((np.ones(len(rows), np.int64), rows, ptr), shape=(len(entries), total))
    flips = (x_mat @ _detector_supports(sim.current_inverse_tableau(), detectors, ancilla, total)).tocsr()
    flips.data %= 2
    flips.eliminate_zeros()
    out = []
    for i, (_, p, fam) in enumerate(entries):
        dets = tuple(int(d) for d in np.sort(flips.indices[flips.indptr[i]:flips.indptr[i + 1]]))
        out.append(CoherentClass(dets, p, fam))
    return out


def _has_amplitudes(item) -> bool:
    """Whether an item carries coherent errors or relaxation (marked for the pull-back)."""
    if isinstance(item, NoisyLayer):
        return (any(n.has_coherent or any(not r.is_trivial for r in n.relaxation) for n in item.sites)
                or any(not r.is_trivial for r in item.idle))
    if isinstance(item, (NoisyMeasure, NoisyReset)):
        return any(not r.is_trivial for r in item.idle)
    if isinstance(item, Conditioned):
        return any(n.has_coherent for b in (item.item.then, item.item.orelse) for layer in b for n in layer.sites)
    return False


class _Classes:
    """Amplitudes of Hamiltonian terms summed per action x on the input, and relaxation jumps
    (each its own Kraus branch: probabilities, never summed with other terms)."""

    def __init__(self) -> None:
        self.amplitude: dict[bytes, complex] = defaultdict(complex)
        self.parts: dict[bytes, dict[str, complex]] = defaultdict(lambda: defaultdict(complex))
        self.xs_of: dict[bytes, np.ndarray] = {}
        self.jumps: list[tuple[np.ndarray, float, dict[str, float]]] = []

    def add(self, inverse: stim.Tableau, item, total: int, ancilla: list[int]) -> None:
        """The item's terms and jumps, pulled back with ``inverse`` (U_t†·U_t)."""
        if isinstance(item, Conditioned):
            self.conditioned(inverse, item, total, ancilla[len(ancilla) - item.lookback])
            return
        if isinstance(item, NoisyLayer):
            for e in layer_errors(item):  # the layer's normal form: operations, idle, context errors
                for label, h in e.hamiltonian:
                    if h:
                        self.term(inverse, e.qubits, label, h, e.source.family, total)
                for r in e.relaxation:
                    self.jump(inverse, r, e.source.family)
            return
        for r in item.idle:
            self.jump(inverse, r, IDLE)

    def term(self, inverse: stim.Tableau, qubits, label: str, h: float, family: str, total: int,
             control: int | None = None) -> None:
        """h·P on ``qubits`` (label in gate order), times Z on the ``control`` ancilla when given."""
        p = stim.PauliString(total)
        for q, c in zip(qubits, label):
            if c != "I":
                p[q] = c
        if control is not None:
            p[control] = "Z"
        xs, c = _action(inverse(p))
        self.add_amplitude(xs, h * c, family)

    def conditioned(self, inverse: stim.Tableau, item: Conditioned, total: int, control: int) -> None:
        """Coherent errors of a branch that runs when the bit (ancilla ``control``) reads v: the
        error exp(-i h P) conditioned on it is exp(-i h P Π_v), Π_v = (I + (-1)^v Z)/2, whose
        generator is the two Pauli terms (h/2) P and (-1)^v (h/2) P Z. The marker sits after the
        branch's gates (all Paulis), so a term anticommuting with k later gates of its branch
        changes sign (-1)^k."""
        for branch, v in ((item.item.then, item.want), (item.item.orelse, 1 - item.want)):
            nops = [n for layer in branch for n in layer.sites]  # context errors after their layer's gates
            later = [as_pauli(n.op) or {} for n in nops]
            for j, nop in enumerate(nops):
                for label, h in nop.hamiltonian.items():
                    if not h:
                        continue
                    term = {q: c for q, c in zip(nop.qubits, label) if c != "I"}
                    sign = (-1) ** sum(_anticommute(term, g) for g in later[j + 1:])
                    self.term(inverse, nop.qubits, label, sign * h / 2, nop.family, total)
                    self.term(inverse, nop.qubits, label, sign * (-1) ** v * h / 2, nop.family, total, control)

    def add_amplitude(self, xs: np.ndarray, amplitude: complex, family: str) -> None:
        """Add A to the class of x (the state changes by -i A|x> to first order)."""
        key = np.packbits(xs).tobytes()
        self.xs_of.setdefault(key, xs)
        self.amplitude[key] += amplitude
        self.parts[key][family] += amplitude

    def jump(self, inverse: stim.Tableau, r, family: str) -> None:
        """Amplitude damping (Kraus diag(1, √(1-γ)) and √γ σ⁻): the jump √γ σ⁻ = (√γ/2)(X + iY) with
        X̃|0…0> = c₁|x₁>, Ỹ|0…0> = c₂|x₂> is one branch of probability (γ/4)|c₁ + i c₂|² when
        x₁ = x₂ (γ on |1>, 0 on |0>), else two of γ/4 (a qubit whose Z value the ideal circuit
        leaves random); the no-jump branch adds an amplitude along Z̃ (below)."""
        if r.is_trivial or r.gamma == 0.0:
            return
        # the no-jump branch diag(1, √(1-γ)) = a I + b Z, b = (1 - √(1-γ))/2: a first-order amplitude
        # b Z̃|0…0> = b c|x>, i.e. -i A|x> with A = i b c, which interferes with the coherent terms
        b = (1 - math.sqrt(1 - r.gamma)) / 2
        xz, cz = _action(inverse.z_output(r.qubit))
        self.add_amplitude(xz, 1j * b * cz, family)
        x1, c1 = _action(inverse.x_output(r.qubit))
        x2, c2 = _action(inverse.y_output(r.qubit))
        if np.array_equal(x1, x2):
            p = r.gamma / 4 * abs(c1 + 1j * c2) ** 2
            if p > 0 and x1.any():
                self.jumps.append((x1, p, {family: p}))
            return
        for xs in (x1, x2):
            if xs.any():
                self.jumps.append((xs, r.gamma / 4, {family: r.gamma / 4}))

    def entries(self) -> list[tuple[np.ndarray, float, dict[str, float]]]:
        """(x, probability, family parts) of every class with an effect (x ≠ 0) and every jump."""
        out = []
        for key, a in self.amplitude.items():
            size = abs(a)
            xs = self.xs_of[key]
            if size == 0.0 or not xs.any():  # x = 0: a phase of the ideal state, not an error
                continue
            p = math.sin(min(size, math.pi / 2)) ** 2
            out.append((xs, p, {f: p * float((np.conj(a) * v).real) / size**2 for f, v in self.parts[key].items()}))
        return out + self.jumps


def _anticommute(a: dict[int, str], b: dict[int, str]) -> bool:
    """Whether two Pauli strings (qubit -> letter) anticommute."""
    qubits = sorted(set(a) | set(b))
    return not commutes("".join(a.get(q, "I") for q in qubits), "".join(b.get(q, "I") for q in qubits))


def _action(pauli: stim.PauliString) -> tuple[np.ndarray, complex]:
    """(x, c) with pauli|0…0> = c|x>: x the X part, c = sign · i^{#Y}."""
    xs, zs = pauli.to_numpy()
    return xs, complex(pauli.sign) * 1j ** int(np.count_nonzero(xs & zs))


def _detector_supports(inverse: stim.Tableau, detectors, ancilla: list[int], total: int) -> sp.csc_matrix:
    """Z support of each detector's pull-back U† D U (qubits × detectors, 0/1)."""
    rows, cols = [], []
    for j, ms in enumerate(detectors):
        d = stim.PauliString(total)
        for m in ms:
            d[ancilla[m]] = "Z"
        back = inverse(d)
        _, zs = back.to_numpy()
        nz = np.flatnonzero(zs)
        rows.append(nz)
        cols.append(np.full(len(nz), j))
    r = np.concatenate(rows) if rows else np.zeros(0, int)
    c = np.concatenate(cols) if cols else np.zeros(0, int)
    return sp.csc_matrix((np.ones(len(r), np.int64), (r, c)), shape=(total, len(detectors)))
