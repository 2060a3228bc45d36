"""The backward light cone of a set of qubits: its qubits, its operations, and the noisy circuit
restricted to it (repeats kept folded).

Walking backwards from the end, an operation belongs to the cone when it acts on a qubit already in
the cone; its other qubits then join the cone. Operations outside the cone cannot change the reduced
state of the chosen qubits at the end, and an error term outside it commutes with every observable
on them pulled back to its layer, so it can be dropped (the standard light-cone argument, e.g.
Bravyi, Gosset & König, Science 362, 308 (2018) for its use with local observables).

Repeated blocks: the live set only grows from one repetition to the one before it, so after at most
m repetitions (m qubits) the restricted block stops changing; the repetitions until then are kept one
by one, the rest stay one folded block (so N = 10^9 costs no more than a few passes).

One walk serves the ideal circuit (:class:`~budget.circuit.ir.Layer`, :class:`~budget.circuit.ir.Repeat`)
and the noisy one (:class:`~budget.errors.noisy.NoisyLayer`, :class:`~budget.errors.noisy.NoisyRepeat`);
any other item kind (measurement, reset, classical control) is refused with a message.
"""

from __future__ import annotations

import dataclasses
from typing import Iterable, Sequence

from budget.circuit.ir import Operation, StructuredCircuit
from budget.circuit.walk import Kind, gate_kind
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyLayer, NoisyOperation, NoisyRepeat
from budget.graph import flat_operations

_Sel = tuple  # ("layer", layer, ops, idle, context) or ("repeat", body_selection, count)


def _select(items: Sequence, live: frozenset[int]) -> tuple[list[_Sel], frozenset[int]]:
    """The cone's part of ``items`` walked backwards from ``live``, and the live set before them."""
    out: list[_Sel] = []
    for it in reversed(items):
        if gate_kind(it, "light cone (gate layers and repeats only)") is Kind.LAYER:
            context = []
            for site in reversed(getattr(it, "context", ())):  # a noisy layer's context errors act after its gates
                if live.intersection(site.qubits):
                    context.append(site)
                    live = live.union(site.qubits)
            ops = tuple(op for op in it.operations if live.intersection(op.qubits))
            idle = tuple(r for r in getattr(it, "idle", ()) if r.qubit in live)
            live = live.union(q for op in ops for q in op.qubits)
            out.append(("layer", it, ops, idle, tuple(reversed(context))))
        else:
            remaining = int(it.count)
            while remaining:
                body, before = _select(it.body, live)
                if before == live:
                    out.append(("repeat", body, remaining))
                    break
                out.append(("repeat", body, 1))
                live = before
                remaining -= 1
    out.reverse()
    return out, live


def light_cone_qubits(circuit: StructuredCircuit | NoisyCircuit, qubits: Iterable[int]) -> frozenset[int]:
    """Qubits whose initial state can influence ``qubits`` at the end, without unrolling repeats."""
    return _select(circuit.body, frozenset(qubits))[1]


def light_cone_operations(circuit: StructuredCircuit | Sequence[Operation], qubits: Iterable[int]) -> list[int]:
    """Indices of the operations in the backward light cone of ``qubits`` (ascending).

    For a :class:`StructuredCircuit` the indices refer to
    :func:`budget.graph.flat_operations` of it (which refuses circuits too large to unroll).
    """
    ops = flat_operations(circuit) if isinstance(circuit, StructuredCircuit) else list(circuit)
    live = set(qubits)
    inside: list[int] = []
    for i in range(len(ops) - 1, -1, -1):
        if live.intersection(ops[i].qubits):
            live.update(ops[i].qubits)
            inside.append(i)
    return inside[::-1]


class _Remap:
    """Rebuilds the selected noisy items on the kept qubits, re-indexed 0..m-1 (each distinct
    operation and layer once; the memos hold the original objects as keys)."""

    def __init__(self, qubits: list[int]):
        self.index = {q: i for i, q in enumerate(qubits)}
        self._ops: dict[NoisyOperation, NoisyOperation] = {}
        self._layers: dict[tuple, NoisyLayer] = {}

    def op(self, nop: NoisyOperation) -> NoisyOperation:
        if nop not in self._ops:
            m = self.index
            self._ops[nop] = dataclasses.replace(
                nop,
                op=dataclasses.replace(nop.op, qubits=tuple(m[q] for q in nop.qubits)),
                relaxation=tuple(dataclasses.replace(r, qubit=m[r.qubit]) for r in nop.relaxation),
            )
        return self._ops[nop]

    def items(self, sel: list[_Sel]) -> tuple[NoisyItem, ...]:
        out: list[NoisyItem] = []
        for s in sel:
            if s[0] == "layer":
                _, layer, ops, idle, context = s
                key = (layer, ops, tuple(r.qubit for r in idle), context)
                if key not in self._layers:
                    self._layers[key] = NoisyLayer(
                        tuple(self.op(n) for n in ops),
                        tuple(dataclasses.replace(r, qubit=self.index[r.qubit]) for r in idle),
                        layer.duration_ns,
                        tuple(self.op(n) for n in context),
                    )
                out.append(self._layers[key])
            else:
                body = self.items(s[1])
                if s[2] == 1:
                    out.extend(body)
                else:
                    out.append(NoisyRepeat(body, s[2]))
        return tuple(out)


def light_cone_circuit(circuit: NoisyCircuit, qubits: Iterable[int]) -> tuple[NoisyCircuit, list[int]]:
    """The noisy circuit restricted to the backward light cone of ``qubits``, re-indexed.

    Returns the restricted circuit and the original index of each of its qubits (sorted).
    """
    sel, live = _select(circuit.body, frozenset(qubits))
    kept = sorted(live)
    body = _Remap(kept).items(sel)
    return NoisyCircuit(tuple(circuit.qubits[q] for q in kept), body, source=circuit.source), kept
