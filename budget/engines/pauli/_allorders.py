"""The coherent error of any circuit to all orders, where the errors' light cones stay small.

Write the noisy circuit (coherent part) as U W: U the ideal circuit, W the coherent error in the
input frame. With layer t applying its gates U_t and then its errors E_t = Π_ops e^{-i H_op}
(H_op = Σ h_P P from the normal form, :func:`budget.errors.normal_form.operation_errors`), walking
the circuit backwards from W = I gives

    W <- U_t† (W E_t) U_t        (layer t, last layer first),

the same pull-back as the engine's first-order sweep, with the product of the error factors kept
instead of the sum of their generators: W carries every order of the Magnus series (Blanes, Casas,
Oteo & Ros, Phys. Rep. 470, 151 (2009)). W is held as dense unitaries on disjoint sets of qubits
(*components*, identity elsewhere): an error joins the qubits of its operation into one component,
a gate that touches a component joins its qubits to it (W ⊗ I on the new qubits, then the
conjugation), and a qubit on which W acts trivially (W commutes with its X and Z) leaves its
component again. Non-Clifford gates are conjugated exactly like Clifford ones; the components
follow the backward light cones of the errors.

A repeated block whose operations either lie inside one component or touch none (components are
first joined along the block's operations until that holds) is folded exactly: per repetition
W <- C† W V with C and V the ideal and noisy block unitaries on the component, so N repetitions
give W <- C^{-N} W V^N, the powers from the Schur form
(:class:`budget.engines.matrices.periodic.CycleBasis`): the cost does not grow with N (average
Hamiltonian theory to every order: Haeberlen & Waugh, Phys. Rev. 175, 453 (1968)). A block that
cannot be closed within MAX_SUPPORT_QUBITS qubits is walked repetition by repetition while the
work allows.

Reach and cost: at most MAX_SUPPORT_QUBITS qubits in one component (dense 2^k x 2^k matrices),
at most WORK_BUDGET multiply-adds (d² 2^|gate| per factor, 40 d³ per power) and MAX_WALKED
layers walked; beyond any of these :class:`OutOfReach` is raised at once, and the engine keeps its
second-order value. The readouts (process and state infidelity, observable changes) are the
clifford engine's (:mod:`budget.engines.clifford.allorders`).
"""

from __future__ import annotations

import numpy as np

from dataclasses import replace

from budget.circuit.walk import Kind, gate_kind
from budget.engines.clifford.allorders import MAX_SUPPORT_QUBITS, WORK_BUDGET, Factor, OutOfReach, apply_local, component_infidelity
from budget.engines.details import Validity
from budget.engines.frame.groups import Budget
from budget.engines.matrices.periodic import cycle_basis
from budget.engines.orders import cancellation_note, second_order_share, term_norm_sum, term_square_by_family, validity_details
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyLayer, NoisyOperation, NoisyRepeat
from budget.errors.normal_form import hamiltonian, operation_errors
from budget.memo import ObjectKey
from budget.pauli_algebra import pauli_unitary

MAX_WALKED = 200_000
"""Layers walked at most (blocks that cannot be folded are walked repetition by repetition)."""
TRIVIAL_TOL = 1e-13
"""A qubit leaves its component when W's parts off the identity on it are below this (entries
of a unitary: rounding of the conjugations is about 1e-16)."""


class LightCones:
    """The coherent error W of a circuit as components (module docstring).

    Args:
        n: qubits of the circuit.
    """

    def __init__(self, n: int):
        self.n = n
        self.owner = np.full(n, -1, np.int64)
        self.parts: dict[int, tuple[list[int], np.ndarray]] = {}
        self._next = 0
        self.work = 0.0
        self.walked = 0
        self.largest = 0
        self._errors: dict[ObjectKey, np.ndarray | None] = {}
        self._gates: dict[ObjectKey, np.ndarray | None] = {}

    # -- walking (backwards: the pull direction) ----------------------------------------------
    def run(self, items: tuple[NoisyItem, ...]) -> list[Factor]:
        """Walk the circuit's items; the components of W (qubits sorted, first most significant)."""
        self._items(items)
        return self.components()

    def _items(self, items: tuple[NoisyItem, ...]) -> None:
        for it in reversed(items):
            if gate_kind(it, "pauli engine") is Kind.LAYER:
                self._layer(it)
            else:
                self._repeat(it)

    def _layer(self, layer: NoisyLayer) -> None:
        self.walked += 1
        if self.walked > MAX_WALKED:
            raise OutOfReach("layers")
        for nop in layer.operations:
            err, gate = self._error(nop), self._gate(nop)
            qs = nop.op.qubits
            if err is None and (gate is None or not np.any(self.owner[list(qs)] >= 0)):
                continue
            cid, pos = self._join(qs)
            qubits, w = self.parts[cid]
            k = len(qubits)
            if err is not None:
                w = apply_local(w, err, pos, k, left=False)
            if gate is not None:
                w = apply_local(apply_local(w, gate.conj().T, pos, k, left=True), gate, pos, k, left=False)
            self.work += 3.0 * 4.0**k * 2 ** len(qs)
            self.parts[cid] = (qubits, w)
            self._shrink(cid, qs)
        self._check()

    def _repeat(self, rep: NoisyRepeat) -> None:
        count = int(rep.count)
        try:
            touched = self._close(rep.body)
        except OutOfReach:
            if self.walked + count * _layer_count(rep.body) > MAX_WALKED:
                raise
            for _ in range(count):
                self._items(rep.body)
            return
        for cid, (ideal, noisy) in self._blocks(rep.body, touched).items():
            qubits, w = self.parts[cid]
            self.work += 80.0 * w.shape[0] ** 3
            w = cycle_basis(ideal).power(count).conj().T @ w @ cycle_basis(noisy).power(count)
            self.parts[cid] = (qubits, w)
            self._shrink(cid, tuple(qubits))
        self._check()

    # -- folding ---------------------------------------------------------------------------------
    def _close(self, body: tuple[NoisyItem, ...]) -> set[int]:
        """Join components along the block's operations until each lies inside one component or
        touches none and carries no error; the ids of the components the block touches."""
        ops = _operations(body)
        changed = True
        while changed:
            changed = False
            for nop in ops:
                qs = list(nop.op.qubits)
                owners = self.owner[qs]
                active = self._error(nop) is not None or (self._gate(nop) is not None and np.any(owners >= 0))
                if active and (np.any(owners < 0) or len(set(owners.tolist())) > 1):
                    self._join(nop.op.qubits)
                    changed = True
        return {int(self.owner[q]) for nop in ops for q in nop.op.qubits if self.owner[q] >= 0}

    def _blocks(self, body: tuple[NoisyItem, ...], touched: set[int]) -> dict[int, tuple[np.ndarray, np.ndarray]]:
        """The block's (ideal, noisy) unitaries on each touched component, in one pass over its
        operations (an operation outside every component acts elsewhere: the block was closed)."""
        acc = {cid: [np.eye(2 ** len(self.parts[cid][0]), dtype=complex) for _ in range(2)] for cid in touched}
        for it in body:
            if gate_kind(it, "pauli engine") is Kind.REPEAT:
                for cid, pair in self._blocks(it.body, touched).items():
                    for a in range(2):
                        acc[cid][a] = cycle_basis(pair[a]).power(int(it.count)) @ acc[cid][a]
                    self.work += 80.0 * acc[cid][0].shape[0] ** 3
                continue
            for nop in it.operations:
                cid = int(self.owner[nop.op.qubits[0]])
                if cid not in acc:
                    continue
                qubits = self.parts[cid][0]
                k, pos = len(qubits), tuple(qubits.index(q) for q in nop.op.qubits)
                gate, err = self._gate(nop), self._error(nop)
                for a, factors in enumerate(((gate,), (gate, err))):
                    for m in factors:
                        if m is not None:
                            acc[cid][a] = apply_local(acc[cid][a], m, pos, k, left=True)
                            self.work += 4.0**k * 2 ** len(pos)
        return {cid: (pair[0], pair[1]) for cid, pair in acc.items()}

    # -- components ------------------------------------------------------------------------------
    def _join(self, qs: tuple[int, ...]) -> tuple[int, tuple[int, ...]]:
        """One component holding ``qs`` (W ⊗ I on new qubits); its id and the positions of ``qs``."""
        ids = list(dict.fromkeys(int(self.owner[q]) for q in qs if self.owner[q] >= 0))
        fresh = [q for q in qs if self.owner[q] < 0]
        if len(ids) == 1 and not fresh:
            cid = ids[0]
        else:
            if sum(len(self.parts[i][0]) for i in ids) + len(fresh) > MAX_SUPPORT_QUBITS:
                raise OutOfReach("support")
            qubits: list[int] = []
            w = np.ones((1, 1), complex)
            for i in ids:
                part_q, part_w = self.parts.pop(i)
                qubits += part_q
                w = np.kron(w, part_w)
            qubits += fresh
            w = np.kron(w, np.eye(2 ** len(fresh)))
            cid = self._next
            self._next += 1
            self.parts[cid] = (qubits, w)
            self.owner[qubits] = cid
            self.largest = max(self.largest, len(qubits))
        qubits = self.parts[cid][0]
        return cid, tuple(qubits.index(q) for q in qs)

    def _shrink(self, cid: int, qs: tuple[int, ...]) -> None:
        """Qubits of ``qs`` on which W acts trivially leave the component (an empty one is a phase)."""
        qubits, w = self.parts[cid]
        for q in qs:
            if q not in qubits:
                continue
            k, p = len(qubits), qubits.index(q)
            t = np.moveaxis(w.reshape((2,) * (2 * k)), (p, k + p), (0, 1))
            if max(np.abs(t[0, 1]).max(), np.abs(t[1, 0]).max(), np.abs(t[0, 0] - t[1, 1]).max()) > TRIVIAL_TOL:
                continue
            w = t[0, 0].reshape(2 ** (k - 1), 2 ** (k - 1))
            qubits = [x for x in qubits if x != q]
            self.owner[q] = -1
        if qubits:
            self.parts[cid] = (qubits, w)
        else:
            del self.parts[cid]

    def components(self) -> list[Factor]:
        """W as (sorted qubits, unitary) factors, first listed qubit most significant."""
        out = []
        for qubits, w in self.parts.values():
            order = np.argsort(qubits)
            k = len(qubits)
            t = w.reshape((2,) * (2 * k)).transpose(list(order) + [k + i for i in order])
            out.append((tuple(sorted(qubits)), t.reshape(2**k, 2**k)))
        return out

    def _check(self) -> None:
        if self.work > WORK_BUDGET:
            raise OutOfReach("work")

    # -- operations ------------------------------------------------------------------------------
    def _error(self, nop: NoisyOperation) -> np.ndarray | None:
        """e^{-i H} of the operation's Hamiltonian terms (normal form), None without any."""
        key = ObjectKey(nop)
        if key not in self._errors:
            h = {label: c for label, c in hamiltonian(operation_errors(nop)).items() if c != 0.0}
            self._errors[key] = pauli_unitary(h) if h else None
        return self._errors[key]

    def _gate(self, nop: NoisyOperation) -> np.ndarray | None:
        """The ideal gate's unitary, None when it is the identity up to a phase."""
        key = ObjectKey(nop)
        if key not in self._gates:
            u = np.asarray(nop.op.unitary(), complex)
            trivial = np.allclose(u, u[0, 0] * np.eye(u.shape[0]), atol=1e-15)
            self._gates[key] = None if trivial else u
        return self._gates[key]


def _operations(items: tuple[NoisyItem, ...]) -> list[NoisyOperation]:
    out = []
    for it in items:
        if gate_kind(it, "pauli engine") is Kind.LAYER:
            out += it.operations
        else:
            out += _operations(it.body)
    return out


def _layer_count(items: tuple[NoisyItem, ...]) -> int:
    return sum(1 if gate_kind(it, "pauli engine") is Kind.LAYER else int(it.count) * _layer_count(it.body) for it in items)


def every_order(circuit: NoisyCircuit, metric: str, first: Budget, families: list[str], *,
                engine: str) -> tuple[Budget, Validity, list[str]] | str:
    """The budget with its coherent part summed to every order where the light cones are in reach,
    with its validity record and notes; else the reason it is out of reach.

    Validity as the clifford engine words it: cancellation c = ||H_1|| / Σ_t ||G_t|| and the share
    of every order beyond the first, s = |e_all - e_1| / e_all (:mod:`budget.engines.orders`). The
    coherent shares keep the split of the first order when that gives the size within a factor 2,
    else follow the first-order term sizes per family (the value then rests on a cancellation
    that the higher orders decide)."""
    cones = LightCones(circuit.num_qubits)
    try:
        exact, _ = component_infidelity(cones.run(circuit.body), metric)
    except OutOfReach as why:
        return str(why)
    how = f"light cones of at most {cones.largest} qubit{'s' if cones.largest != 1 else ''}"
    share = second_order_share(exact, first.coherent_resummed)
    sizes = term_norm_sum(circuit)
    norm = float(np.sqrt(first.coherent))
    cancellation = norm / sizes if sizes > 0 else 1.0
    validity = replace(validity_details(share, cancellation, norm, None), coherent_without_second_order=first.coherent_resummed + 0.0,
                       second_order="not needed: every order summed", coherent_order=f"all orders ({how})")
    notes = [note] if (note := cancellation_note(share, cancellation, engine=engine, all_orders=how)) else []
    lead, shares = first.coherent, first.coherent_shares
    if not 0.5 * exact <= lead <= 2.0 * exact:
        by_family = term_square_by_family(circuit)
        sizes_f = np.array([by_family.get(f, 0.0) for f in families])
        if lead <= 0:
            shares, lead = sizes_f, float(sizes_f.sum())
        else:
            shares = sizes_f * (lead / sizes_f.sum()) if sizes_f.sum() > 0 else np.zeros_like(sizes_f)
    return replace(first, coherent=lead, coherent_shares=shares, coherent_resummed=exact), validity, notes
