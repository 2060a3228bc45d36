"""The backward light cone of a set of qubits, as a smaller noisy circuit (repeats kept).

An error term after layer t changes <O> only if it fails to commute with O pulled back to layer t,
whose support lies inside the backward light cone of O's qubits; everything outside the cone
commutes with every quantity involved and can be dropped (the standard light-cone argument, e.g.
Bravyi, Gosset & König, Science 362, 308 (2018) for its use with local observables). The
restricted circuit keeps, going backwards, every operation touching a live qubit (its qubits then
become live) and the idle relaxation of live qubits, and re-indexes the kept qubits 0..m-1.

Repeated blocks: the live set only grows from one repetition to the one before it, so after at
most m repetitions the restricted block stops changing; the repetitions until then are kept one by
one, the rest stay one folded block (so N = 10^9 costs little).
"""

from __future__ import annotations

import dataclasses

from budget.circuit.walk import Kind, gate_kind
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyLayer, NoisyOperation, NoisyRepeat

_Sel = tuple  # ("layer", layer, ops, idle) or ("repeat", body_selection, count)


def _select(items: tuple[NoisyItem, ...], live: set[int]) -> tuple[list[_Sel], set[int]]:
    out: list[_Sel] = []
    for it in reversed(items):
        if gate_kind(it, "clifford engine light cone") is Kind.LAYER:
            ops = tuple(nop for nop in it.operations if live.intersection(nop.qubits))
            idle = tuple(r for r in it.idle if r.qubit in live)
            live = live.union(q for nop in ops for q in nop.qubits)
            out.append(("layer", it, ops, idle))
            continue
        remaining = int(it.count)
        while remaining:
            body, after = _select(it.body, live)
            if after == live:
                out.append(("repeat", body, remaining))
                break
            out.append(("repeat", body, 1))
            live = after
            remaining -= 1
    out.reverse()
    return out, live


class _Remap:
    def __init__(self, qubits: list[int]):
        self.index = {q: i for i, q in enumerate(qubits)}
        self._ops: dict[int, NoisyOperation] = {}
        self._layers: dict[tuple, NoisyLayer] = {}

    def op(self, nop: NoisyOperation) -> NoisyOperation:
        if id(nop) not in self._ops:
            m = self.index
            self._ops[id(nop)] = dataclasses.replace(
                nop,
                op=dataclasses.replace(nop.op, qubits=tuple(m[q] for q in nop.qubits)),
                relaxation=tuple(dataclasses.replace(r, qubit=m[r.qubit]) for r in nop.relaxation),
            )
        return self._ops[id(nop)]

    def items(self, sel: list[_Sel]) -> tuple[NoisyItem, ...]:
        out: list[NoisyItem] = []
        for s in sel:
            if s[0] == "layer":
                _, layer, ops, idle = s
                key = (id(layer), tuple(map(id, ops)), tuple(r.qubit for r in idle))
                if key not in self._layers:
                    self._layers[key] = NoisyLayer(
                        tuple(self.op(n) for n in ops),
                        tuple(dataclasses.replace(r, qubit=self.index[r.qubit]) for r in idle),
                        layer.duration_ns,
                    )
                out.append(self._layers[key])
            else:
                body = self.items(s[1])
                if s[2] == 1:
                    out.extend(body)
                else:
                    out.append(NoisyRepeat(body, s[2]))
        return tuple(out)


def light_cone(circuit: NoisyCircuit, qubits: set[int] | frozenset[int]) -> tuple[NoisyCircuit, list[int]]:
    """The circuit restricted to the backward light cone of ``qubits``, re-indexed.

    Returns the restricted circuit and the original index of each of its qubits (sorted).
    """
    sel, live = _select(circuit.body, set(qubits))
    kept = sorted(live)
    body = _Remap(kept).items(sel)
    return (
        NoisyCircuit(tuple(circuit.qubits[q] for q in kept), body, source=circuit.source),
        kept,
    )
