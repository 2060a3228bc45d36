"""Apply an error model to a structured circuit: StructuredCircuit + ErrorModel -> NoisyCircuit.

Works on the structure: each distinct operation, layer and repeat is handled once, so a block
repeated 10**9 times, or a layer of 1000 qubits repeated, attaches as fast as one pass over the
text of the circuit. Per operation (noisy.py gives the channel order): coherent unitary from the
knobs (:mod:`budget.errors.knobs`), depolarizing λ = r d/(d-1) from the average infidelity r
(Magesan, Gambetta, Emerson, PRL 106, 180504 (2011)), and T1/T2 relaxation of each of its qubits for
its duration. Per layer: the layer lasts as long as its longest operation; every qubit relaxes for
the part of the layer it spends outside an operation (idle). Relaxations that do nothing (zero time,
or a qubit without T1 and T2) are left out. Context errors (spectator ZZ, drive crosstalk, pulse
bleed) are error sites of the layer they act in (``NoisyLayer.context``, built by
:mod:`budget.errors.context_terms`, placed by :mod:`budget.errors.context_attach`); calibration in
context replaces an operation's parameters by the most specific matching ``[[context]]`` table.
Pulse bleed into a layer is the last error site of the layer before it, so a layer's noisy form
depends on the next layer: a repeated block whose first or last repetition sees a different
neighbour is split into that repetition and a repeat of the rest (one extra copy of the block's
structure, never an unrolling).
"""

from __future__ import annotations

import dataclasses
import difflib
import re
from typing import Literal

from budget.circuit.ir import Layer, Measure, Operation, Repeat, Reset, StructuredCircuit
from budget.circuit.walk import Kind, kind_of
from budget.errors.context import ContextTable
from budget.errors.context_attach import ContextPlacer
from budget.errors.knobs import CoherentError, coherent_error
from budget.errors.model import ErrorModel
from budget.errors.noisy import (
    NoisyCircuit,
    NoisyIf,
    NoisyItem,
    NoisyLayer,
    NoisyMeasure,
    NoisyOperation,
    NoisyRepeat,
    NoisyReset,
    Relaxation,
)
from budget.errors.params import GateParams
from budget.memo import ObjectKey
from budget.problems import ModelError, TooLargeError

FamilyBy = Literal["gate", "pair"]


def attach(
    circuit: StructuredCircuit,
    model: ErrorModel,
    *,
    family_by: FamilyBy = "gate",
    check_qubits: bool = True,
) -> NoisyCircuit:
    """Give every operation and idle slot of ``circuit`` its error channel from ``model``.

    Args:
        circuit: the structured circuit (repeats kept).
        model: a validated error model.
        family_by: ``"gate"``: family = the gate table's ``family`` or the gate name (``"cz"``);
            ``"pair"``: that name followed by the qubits in gate order (``"cz q[0],q[1]"``).
        check_qubits: reject a model that names a qubit the circuit does not have (catches typos
            such as ``q[l]`` or ``Q[3]``). Indexed names in one of the circuit's registers
            (``q[7]`` when the circuit has ``q[0]``) pass: one device-wide model serves circuits on
            fewer qubits. False skips the check.

    Returns:
        The NoisyCircuit. ``readout_error`` holds the measured qubits, or every qubit when the
        circuit measures none.

    Raises:
        ModelError: the model names a qubit that cannot belong to the circuit (``check_qubits``).
    """
    if family_by not in ("gate", "pair"):
        raise ValueError(f"family_by = {family_by!r}: expected 'gate' or 'pair'")
    if check_qubits:
        _check_qubits(circuit, model)
    _check_size(circuit)
    attacher = _Attacher(circuit, model, family_by)
    body = attacher.items(circuit.body, None, None)
    seam = attacher.context.seam(_last_in(circuit.body), _first_in(circuit.body))
    later = (*seam, *body) if seam else None  # a repetition after another: the bleed across the seam first
    measured = circuit.measured or tuple(range(circuit.num_qubits))
    readout = {q: model.qubit(circuit.qubits[q]).readout_error for q in measured}
    return NoisyCircuit(circuit.qubits, body, readout, circuit.source, later)


MAX_IDLE_SLOTS = 20_000_000
"""Most (qubit, written layer) pairs attached: every qubit gets an idle slot in every layer as
written (repeats folded), which costs memory and time in proportion (about 10 s per 10^7 on the
development machine)."""


def _written_layers(items: tuple) -> int:
    """Layers as written (repeats folded); other items (measurements, resets) count as one."""
    return sum(_written_layers(it.body) if kind_of(it, "attach") is Kind.REPEAT else 1 for it in items)


def _check_size(circuit: StructuredCircuit) -> None:
    """Refuse, before attaching, a circuit whose idle slots alone would exceed MAX_IDLE_SLOTS."""
    layers = _written_layers(circuit.body)
    if circuit.num_qubits * layers > MAX_IDLE_SLOTS:
        raise TooLargeError(
            f"{circuit.source}: {circuit.num_qubits} qubits x {layers} layers as written = "
            f"{circuit.num_qubits * layers:.3g} idle slots; the limit is {MAX_IDLE_SLOTS:.0e}: write repeated "
            "parts as for loops, or analyse fewer qubits"
        )


_INDEXED = re.compile(r"^(.*?)([\[(])\s*\d+(\s*,\s*\d+)*\s*[\])]$")


def _register(name: str) -> str | None:
    """``"q["`` for ``"q[3]"``, ``"q("`` for ``"q(0, 1)"``; None for names without an index."""
    m = _INDEXED.match(name)
    return m.group(1) + m.group(2) if m else None


def _check_qubits(circuit: StructuredCircuit, model: ErrorModel) -> None:
    """A name the circuit lacks is refused: a typo, or a qubit beyond the circuit's register
    (``q[7]`` for a circuit on q[0..2]), which a model passes only when it declares itself
    ``device_wide`` (a device qubit this circuit leaves unused)."""
    known = set(circuit.qubits)
    registers = {_register(q) for q in circuit.qubits} - {None}
    shown = ", ".join(circuit.qubits[:8]) + (", ..." if circuit.num_qubits > 8 else "")
    for name, path in model.mentions.items():
        if name in known:
            continue
        if _register(name) not in registers:
            close = difflib.get_close_matches(name, circuit.qubits, n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise ModelError(
                f"{path} in {model.source}: qubit {name!r} is neither a qubit nor in a register of "
                f"circuit {circuit.source} (its qubits: {shown}){hint}"
            )
        if not model.device_wide:
            raise ModelError(
                f"{path} in {model.source}: qubit {name!r} is beyond circuit {circuit.source} (its qubits: {shown}); "
                "a model names only qubits the circuit has, unless the file says device_wide = true at its top "
                "(it describes a larger device, whose unused qubits are then accepted)"
            )


class _Attacher:
    """One attach call: caches keyed by structure so nothing is computed twice."""

    def __init__(self, circuit: StructuredCircuit, model: ErrorModel, family_by: str):
        self.names = circuit.qubits
        self.model = model
        self.family_by = family_by
        self.qubit_params = [model.qubit(n) for n in circuit.qubits]
        self._relax: dict[tuple[int, float], Relaxation | None] = {}
        self._coherent: dict[tuple, CoherentError] = {}
        self._ops: dict[tuple, NoisyOperation] = {}
        self._items: dict = {}
        self.context = ContextPlacer(circuit, model)

    def relax(self, qubit: int, duration_ns: float) -> Relaxation | None:
        key = (qubit, duration_ns)
        if key not in self._relax:
            r = self.qubit_params[qubit].relaxation(qubit, duration_ns) if duration_ns > 0 else None
            self._relax[key] = None if r is None or r.is_trivial else r
        return self._relax[key]

    def items(self, items: tuple, prev: Layer | None, nxt: Layer | None) -> tuple[NoisyItem, ...]:
        """The noisy items of ``items``, which run after the circuit layer ``prev`` and before the
        circuit layer ``nxt`` (None: the start or end of the circuit, or a measurement, reset or
        if block in between: no pulse bleeds across those)."""
        out: list[NoisyItem] = []
        for i, it in enumerate(items):
            kind = kind_of(it, "attach")
            if kind is Kind.LAYER:
                out.append(self.expanded(it, _first_in(items, nxt, i + 1)))
                prev = it
            elif kind is Kind.REPEAT:
                out.extend(self.repeat(it, prev, _first_in(items, nxt, i + 1)))
                prev = _last_in(it.body)
            elif kind in (Kind.MEASURE, Kind.RESET):
                key = ObjectKey(it)
                if key not in self._items:
                    self._items[key] = self.probe(it)
                out.append(self._items[key])
                prev = None
            else:  # Kind.IF: a bleed into a branch is the branch's own (it runs only with the branch)
                then = (*self.context.seam(prev, _first_in(it.then)), *self.items(it.then, prev, None))
                orelse = (*self.context.seam(prev, _first_in(it.orelse)), *self.items(it.orelse, prev, None))
                out.append(NoisyIf(it, then, orelse))
                prev = None
        return tuple(out)

    def repeat(self, rep: Repeat, prev: Layer | None, nxt: Layer | None) -> tuple[NoisyItem, ...]:
        """A repeat's noisy items: one NoisyRepeat, or, when pulse bleed makes its first or last
        repetition differ from the others, those repetitions written out beside a repeat of the rest."""
        if not self.context.has_bleed:
            key: tuple = (ObjectKey(rep),)
            prev = nxt = None
        else:
            key = (ObjectKey(rep), None if prev is None else ObjectKey(prev), None if nxt is None else ObjectKey(nxt))
        if key in self._items:
            return self._items[key]
        count = int(rep.count)
        if count <= 1 or not self.context.has_bleed:
            block: tuple[NoisyItem, ...] = (NoisyRepeat(self.items(rep.body, prev, nxt), rep.count),)
        else:
            first, last = _first_in(rep.body), _last_in(rep.body)
            parts: list[list] = []
            for body, times in ((self.items(rep.body, prev, first), 1), (self.items(rep.body, last, first), count - 2),
                                (self.items(rep.body, last, nxt), 1)):
                if parts and _same(parts[-1][0], body):
                    parts[-1][1] += times
                elif times:
                    parts.append([body, times])
            if len(parts) == 1:
                block = (NoisyRepeat(parts[0][0], rep.count),)
            else:
                block = tuple(x for body, times in parts for x in (body if times == 1 else (NoisyRepeat(body, times),)))
        self._items[key] = block
        return block

    def expanded(self, layer: Layer, nxt: Layer | None) -> NoisyLayer:
        """The layer with its context errors: crosstalk, spectator ZZ, bleed into ``nxt``."""
        bleed = self.context.bleed_key(layer, nxt)
        key = (ObjectKey(layer), bleed)
        if key not in self._items:
            base = (ObjectKey(layer), ())
            if base not in self._items:
                real = self.layer(layer)
                context = self.context.after(layer, real)
                self._items[base] = dataclasses.replace(real, context=context) if context else real
            plain = self._items[base]
            sites = self.context.bleed(bleed)
            self._items[key] = dataclasses.replace(plain, context=plain.context + sites) if sites else plain
        return self._items[key]

    def layer(self, layer: Layer) -> NoisyLayer:
        ops = tuple(self.operation(op, self.context.table(op, layer)) for op in layer.operations)
        length = max((n.duration_ns for n in ops), default=0.0)
        idle: list[Relaxation] = []
        if length > 0:
            busy = {q: n.duration_ns for n in ops for q in n.qubits}
            for q in range(len(self.names)):
                r = self.relax(q, length - busy.get(q, 0.0))
                if r is not None:
                    idle.append(r)
        return NoisyLayer(ops, tuple(idle), length)

    def probe(self, it: Measure | Reset) -> NoisyMeasure | NoisyReset:
        """Measurement or reset: its error per qubit ([qubits] readout_error / reset_error), its
        duration ([gates.measure] / [gates.reset] duration_ns, the longest of its qubits) and the
        idle relaxation of every other qubit meanwhile."""
        name = "measure" if it.kind is Kind.MEASURE else "reset"
        params = [self.model.gate(name, (self.names[q],)) for q in it.qubits]
        length = max((gp.duration_ns for gp in params), default=0.0)
        family = params[0].family or name if params else name
        idle = tuple(r for q in range(len(self.names)) if q not in it.qubits
                     for r in [self.relax(q, length)] if r is not None)
        if it.kind is Kind.MEASURE:
            errors = tuple(self.qubit_params[q].readout_error for q in it.qubits)
            return NoisyMeasure(it, family, errors, idle, length)
        errors = tuple(self.qubit_params[q].reset_error for q in it.qubits)
        return NoisyReset(it, family, errors, idle, length)

    def operation(self, op: Operation, table: ContextTable | None = None) -> NoisyOperation:
        key = (op.gate, op.qubits, op.params, ObjectKey(op.matrix), ObjectKey(table))
        if key in self._ops:
            return self._ops[key]
        names = tuple(self.names[q] for q in op.qubits)
        gp = self.model.gate(op.gate, names)
        if table is not None:
            gp = self.context.calibrated(gp, table, names)
        k = len(op.qubits)
        ckey = (op.gate, op.params, gp, k)
        if ckey not in self._coherent:
            self._coherent[ckey] = coherent_error(op.gate, op.params, gp, k)
        coh = self._coherent[ckey]
        d = 2**k
        relax = (self.relax(q, gp.duration_ns) for q in op.qubits)
        nop = NoisyOperation(
            op=op,
            family=self.family(op, gp, names, table),
            coherent=coh.unitary,
            hamiltonian=dict(coh.hamiltonian),
            depolarizing=gp.avg_infidelity * d / (d - 1),
            relaxation=tuple(r for r in relax if r is not None),
            duration_ns=gp.duration_ns,
            knob_generators={name: dict(g) for name, g in coh.generators.items()},
            knob_values=dict(coh.values),
        )
        self._ops[key] = nop
        return nop

    def family(self, op: Operation, gp: GateParams, names: tuple[str, ...], table: ContextTable | None = None) -> str:
        base = gp.family or (op.label if op.gate == "unitary" and op.label else op.gate)
        if table is not None and "family" not in table.fields:
            base = f"{base} [{table.name}]"  # the report names the context table that applied
        return base if self.family_by == "gate" else f"{base} {','.join(names)}"


_NOTHING = object()


def _edge_layer(items: tuple, last: bool, start: int = 0):
    """The first (``last``: the last) gate layer that ``items[start:]`` run; None when a
    measurement, reset or if block comes first (last); _NOTHING when they run no item."""
    for i in (range(len(items) - 1, start - 1, -1) if last else range(start, len(items))):
        it = items[i]
        kind = kind_of(it, "attach")
        if kind is Kind.LAYER:
            return it
        if kind is not Kind.REPEAT:
            return None
        if it.body:
            inner = _edge_layer(it.body, last)
            return None if inner is _NOTHING else inner
    return _NOTHING


def _first_in(items: tuple, after: Layer | None = None, start: int = 0) -> Layer | None:
    """The first gate layer that ``items[start:]`` run (``after`` when they run none)."""
    found = _edge_layer(items, False, start)
    return after if found is _NOTHING else found


def _last_in(items: tuple) -> Layer | None:
    """The last gate layer that ``items`` run (None when a measurement, reset or if block ends them)."""
    found = _edge_layer(items, True)
    return None if found is _NOTHING else found


def _same(a: tuple, b: tuple) -> bool:
    return len(a) == len(b) and all(x is y for x, y in zip(a, b))
