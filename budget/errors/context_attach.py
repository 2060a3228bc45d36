"""Where context errors go in one attach call: which error sites each layer gets, and which
``[[context]]`` table calibrates an operation (docs/error-model.md, "Context errors").

:class:`ContextPlacer` is used by :func:`budget.errors.attach.attach`; it caches by structure as
attach does, so a layer repeated 10**9 times is looked at once. The error sites themselves are
built in :mod:`budget.errors.context_terms`.
"""

from __future__ import annotations

import dataclasses

from budget.circuit.gates import GATES, exchange_symmetric
from budget.circuit.ir import Layer, Operation, StructuredCircuit
from budget.errors.context import ContextTable, Crosstalk, mirrored_fields
from budget.errors.context_terms import crosstalk_terms, spill_operation, zz_operation
from budget.errors.model import ErrorModel
from budget.errors.noisy import NoisyLayer, NoisyOperation
from budget.errors.params import GateParams
from budget.problems import ModelError


class ContextPlacer:
    """The context errors of one model on one circuit (see module docstring).

    Attributes:
        zz: (i, j), i < j -> ζ in kHz of every coupled pair with a non-zero rate.
        has_bleed: the model has pulse-bleed rules (attach then tracks the previous layer).
    """

    def __init__(self, circuit: StructuredCircuit, model: ErrorModel):
        self.names = circuit.qubits
        self.model = model
        self.index = {n: i for i, n in enumerate(circuit.qubits)}
        self.zz = zz_rates(circuit, model, self.index)
        self.crosstalk: dict[str, list[Crosstalk]] = {}
        for rule in model.context.crosstalk:
            self.crosstalk.setdefault(rule.source, []).append(rule)
        self.has_bleed = bool(model.context.bleed or model.context.bleed_qubit)
        self.tables: dict[str, list[ContextTable]] = {}
        for t in model.context.tables:
            self.tables.setdefault(t.gate, []).append(t)
        self._cache: dict = {}

    def after(self, layer: Layer, noisy: NoisyLayer) -> tuple[NoisyOperation, ...]:
        """The context error sites of a layer (``noisy`` its attached form), before any bleed into
        the next layer: crosstalk, then spectator ZZ."""
        out = crosstalk_terms(noisy.operations, self.crosstalk, self.names, self.index) if self.crosstalk else []
        return (*out, *self.zz_terms(layer, noisy.duration_ns))

    def zz_terms(self, layer: Layer, duration_ns: float) -> tuple[NoisyOperation, ...]:
        """Spectator ZZ of every coupled pair not running its own two-qubit gate in ``layer``
        (sorted pairs: the terms are diagonal and commute)."""
        if duration_ns <= 0 or not self.zz:
            return ()
        busy = {frozenset(op.qubits) for op in layer.operations if len(op.qubits) == 2}
        active = tuple(p for p in self.zz if frozenset(p) not in busy)
        key = ("zz", duration_ns, active)
        if key not in self._cache:
            self._cache[key] = tuple(self._zz_op(p, duration_ns) for p in active)
        return self._cache[key]

    def _zz_op(self, pair: tuple[int, int], duration_ns: float) -> NoisyOperation:
        key = ("zz-op", pair, duration_ns)
        if key not in self._cache:
            self._cache[key] = zz_operation(pair, self.names, self.zz[pair], duration_ns)
        return self._cache[key]

    def bleed_key(self, prev: Layer | None, layer: Layer | None) -> tuple:
        """(qubit, previous gate, its angles, next gate, fraction) of every bleed between the layers."""
        if prev is None or layer is None or not self.has_bleed:
            return ()
        before = {op.qubits[0]: op for op in prev.operations if len(op.qubits) == 1}
        every, per_qubit = self.model.context.bleed, self.model.context.bleed_qubit
        out = []
        for op in layer.operations:
            a = before.get(op.qubits[0]) if len(op.qubits) == 1 else None
            if a is None:
                continue
            f = per_qubit.get((a.gate, op.gate, self.names[op.qubits[0]]), every.get((a.gate, op.gate)))
            if f:
                out.append((op.qubits[0], a.gate, a.params, op.gate, f))
        return tuple(out)

    def bleed(self, key: tuple) -> tuple[NoisyOperation, ...]:
        """The pulse-bleed error sites of one :meth:`bleed_key` (empty without bleed)."""
        if not key:
            return ()
        if ("bleed", key) not in self._cache:
            self._cache[("bleed", key)] = tuple(
                spill_operation(q, f"bleed {a}->{b} {self.names[q]}", "bleed", a, params, f,
                                duration_ns=self.model.gate(a, (self.names[q],)).duration_ns)
                for q, a, params, b, f in key)
        return self._cache[("bleed", key)]

    def seam(self, prev: Layer | None, layer: Layer | None) -> tuple[NoisyLayer, ...]:
        """A layer without gates that holds the bleed from ``prev`` into ``layer`` when no noisy
        layer of ``prev`` can carry it (the start of an if branch, a repetition of the whole
        circuit); empty without such a bleed."""
        sites = self.bleed(self.bleed_key(prev, layer))
        return (NoisyLayer((), (), 0.0, sites),) if sites else ()

    def table(self, op: Operation, layer: Layer) -> ContextTable | None:
        """The most specific ``[[context]]`` table of this operation's gate that matches the layer.

        Raises:
            ModelError: two tables match equally specifically.
        """
        tables = self.tables.get(op.gate)
        if not tables:
            return None
        names = tuple(self.names[q] for q in op.qubits)
        symmetric = exchange_symmetric(op.gate)
        present = set()
        for o in layer.operations:
            if o is not op:
                ns = tuple(self.names[q] for q in o.qubits)
                present.add((o.gate, ns))
                if exchange_symmetric(o.gate):
                    present.add((o.gate, ns[::-1]))
        driven = (all(_driven(o) for o in layer.operations)
                  and sum(len(o.qubits) for o in layer.operations) == len(self.names))
        hits = [t for t in tables
                if (t.qubits is None or t.qubits == names or symmetric and t.qubits == names[::-1])
                and all(w in present for w in t.with_ops) and (driven or not t.all_driven)]
        if not hits:
            return None
        best = max(t.specificity for t in hits)
        top = [t for t in hits if t.specificity == best]
        if len(top) > 1:
            raise ModelError(
                f"{top[0].path} and {top[1].path} in {self.model.source}: both match {op.gate} on "
                f"{','.join(names)} equally specifically (line {op.line}); add a condition to one of them"
            )
        return top[0]

    @staticmethod
    def calibrated(gp: GateParams, table: ContextTable, names: tuple[str, ...]) -> GateParams:
        """``gp`` with the table's keys replaced (per-qubit values reversed for the other order)."""
        fields = table.fields if table.qubits is None or table.qubits == names else mirrored_fields(table)
        return dataclasses.replace(gp, **fields)


def _driven(op: Operation) -> bool:
    """A pulse drives the qubit: any gate but a virtual Z gate (fallback gates count as driven)."""
    s = GATES.get(op.gate)
    return s is None or not s.virtual


def zz_rates(circuit: StructuredCircuit, model: ErrorModel, index: dict[str, int]) -> dict[tuple[int, int], float]:
    """(i, j) with i < j -> ζ in kHz for every coupled pair of the circuit with a non-zero rate: the
    pairs named in [couplings."A,B"] whose qubits the circuit has, and, with a default rate, every
    pair some two-qubit gate of the circuit acts on."""
    ctx = model.context
    rates: dict[tuple[int, int], float] = {}
    if ctx.zz_default_khz:
        for op in circuit.distinct_operations():
            if len(op.qubits) == 2:
                rates.setdefault(tuple(sorted(op.qubits)), ctx.zz_default_khz)
    for pair, khz in ctx.zz_khz.items():
        ids = [index.get(n) for n in pair]
        if None not in ids:
            rates[tuple(sorted(ids))] = khz
    return {p: rates[p] for p in sorted(rates) if rates[p] > 0}


def unmatched_context(circuit: StructuredCircuit, model: ErrorModel) -> tuple[str, ...]:
    """One warning per ``[[context]]`` table that matches no operation of ``circuit`` (its key
    path, what it selects, and the rule), in file order. Not an error: a device-wide model holds
    tables for qubits and layers that a given circuit never has; but a table that silently does
    nothing is usually a typo in its gate, qubits or conditions."""
    if not model.context.tables:
        return ()
    placer = ContextPlacer(circuit, model)
    used: set[str] = set()
    for layer in circuit.distinct_layers():
        for op in layer.operations:
            table = placer.table(op, layer)
            if table is not None:
                used.add(table.path)
    out = []
    for t in model.context.tables:
        if t.path in used:
            continue
        what = f"{t.gate} on {','.join(t.qubits) if t.qubits else 'any qubits'}"
        if t.with_ops:
            what += " with " + "; ".join(f"{g} {','.join(qs)}" for g, qs in t.with_ops)
        if t.all_driven:
            what += " in a layer driving every qubit"
        out.append(f"{t.path} in {model.source} ({what}) matches no operation of {circuit.source}: its values are "
                   "not used here (a table applies to the operations its gate, qubits and conditions select)")
    return tuple(out)


def model_notes(circuit: StructuredCircuit, model: ErrorModel) -> tuple[str, ...]:
    """Warnings about the model on this circuit: unusual values (:meth:`ErrorModel.warnings`) and
    ``[[context]]`` tables that match nothing (:func:`unmatched_context`)."""
    return model.warnings() + unmatched_context(circuit, model)
