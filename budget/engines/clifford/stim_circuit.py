"""A Clifford circuit with measurements as a stim circuit (repeats kept as REPEAT blocks).

stim (Gidney, Quantum 5, 497 (2021)) simulates stabilizer circuits with measurement, reset and
Pauli feed-forward at scale. This module writes a :class:`~budget.circuit.ir.StructuredCircuit`
in its language: each distinct gate becomes the stim gates of its tableau
(``stim.Tableau.from_unitary_matrix`` then ``to_circuit``), a measurement ``M``, a reset ``R``, a
repeat ``REPEAT``. Feed-forward is a Pauli controlled by the latest outcome of one bit
(``CX rec[-k] q``); within a repeated block that bit must be written in the same iteration, so
the look-back ``k`` is the same every time. Noise is added by the caller through a callback per item.

It also lists the measurement record: for each outcome, in execution order (the order of the
record in both the circuit and stim), the qubit measured.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import stim

from budget.circuit.ir import Operation, StructuredCircuit, item_kind
from budget.circuit.walk import Kind, counted, kind_of
from budget.errors.noisy import NoisyCircuit, NoisyIf, NoisyMeasure
from budget.memo import ObjectKey
from budget.problems import InputError, place

_PAULIS = {"x": "X", "y": "Y", "z": "Z", "id": "I"}


Noise = Callable[["Text", object], None]
"""Called with the stim circuit being written and a noisy item (after a gate layer, before a
measurement, after a reset); appends the item's noise instructions."""


def gate_circuit(op: Operation) -> stim.Circuit:
    """The stim gates of one Clifford operation on stim qubits 0..k-1 (its own qubit order).

    Raises:
        ValueError: the operation is not Clifford.
    """
    u = op.unitary()
    try:
        tab = stim.Tableau.from_unitary_matrix(np.asarray(u, dtype=complex), endian="big")
    except ValueError:
        raise ValueError(f"gate {op.gate} is not Clifford") from None
    return tab.to_circuit("elimination")


def to_stim(circuit: NoisyCircuit, noise: Noise | None = None,
            readout: Callable[[NoisyMeasure], bool] | None = None) -> stim.Circuit:
    """The stim circuit of ``circuit`` (Clifford gates, measurements, resets, Pauli feed-forward on
    one bit), repeats kept as REPEAT blocks; ``noise`` appends each item's noise (None: ideal);
    measurements for which ``readout`` says True flip their recorded bit with the readout error
    (stim's ``M(p)``: the bit, not the qubit).

    Raises:
        InputError: a non-Clifford gate or feed-forward stim cannot express (``file:line``).
    """
    out = Text()
    _Writer(circuit.source, noise, readout).items(out, circuit.body, {}, [0], 0)
    return stim.Circuit("\n".join(out.lines))


class Text:
    """stim circuit text being written (one parse at the end is far faster than many appends)."""

    def __init__(self) -> None:
        self.lines: list[str] = []

    def append(self, name: str, targets, args=()) -> None:
        head = f"{name}({','.join(repr(float(a)) for a in args)})" if len(args) else name
        self.lines.append(f"{head} {' '.join(str(t) for t in targets)}")


def record_qubits(circuit: NoisyCircuit | StructuredCircuit) -> list[int]:
    """The qubit of each measurement outcome, in record (execution) order, repeats unrolled.

    Raises:
        InputError: a measurement inside an if block (the record would depend on the branch).
    """
    out: list[int] = []

    def walk(items) -> None:
        for it in items:
            kind = kind_of(it, "record_qubits")
            inner = getattr(it, "item", it)  # the ideal item of a noisy one
            if kind is Kind.MEASURE:
                out.extend(inner.qubits)
            elif kind is Kind.REPEAT:
                mark = len(out)
                walk(it.body)
                out.extend(out[mark:] * (it.count - 1))
            elif kind is Kind.IF and _measures(it):
                raise InputError(f"{place(circuit.source, inner.line)}: a measurement inside an if block: the "
                                 "measurement record would depend on the branch taken (not supported)")

    walk(circuit.body)
    return out


def _measures(it) -> bool:
    """Whether ``it`` is or holds a measurement."""
    return any(x.kind is Kind.MEASURE for x, _ in counted((it,), where="record_qubits"))


class _Writer:
    def __init__(self, source: str, noise: Noise | None, readout):
        self.source = source
        self.noise = noise
        self.readout = readout
        self.cache: dict[tuple, list[tuple[str, list[int], list[float]]]] = {}

    def fail(self, line: int | None, what: str) -> InputError:
        return InputError(f"{place(self.source, line)}: {what}")

    def op(self, out: Text, op: Operation) -> None:
        key = (op.gate, op.params, ObjectKey(op.matrix))
        if key not in self.cache:
            try:
                self.cache[key] = [(inst.name, [t.value for t in inst.targets_copy()], inst.gate_args_copy())
                                   for inst in gate_circuit(op)]
            except ValueError:
                raise self.fail(op.line, f"gate {op.gate}{list(op.params) or ''} is not Clifford: the "
                                "stabilizer path needs Clifford gates") from None
        for name, targets, args in self.cache[key]:
            out.append(name, [op.qubits[t] for t in targets], args)

    def items(self, out: Text, items, written: dict[str, int], count: list[int], start: int) -> None:
        """Write items; ``written``: bit -> record index of its latest write; ``count``: [records so
        far]; ``start``: record index where the current iteration of the innermost repeat began."""
        for it in items:
            kind = kind_of(it, "stabilizer path")
            if kind is Kind.LAYER:
                for nop in it.operations:
                    self.op(out, nop.op)
                if self.noise is not None:
                    self.noise(out, it)
            elif kind is Kind.MEASURE:
                if self.noise is not None:
                    self.noise(out, it)
                if self.readout is not None and self.readout(it):
                    for q, e in zip(it.item.qubits, it.readout_error):
                        out.append("M", [q], [e] if e else [])
                else:
                    out.append("M", list(it.item.qubits))
                for b in it.item.bits:
                    written[b] = count[0]
                    count[0] += 1
            elif kind is Kind.RESET:
                out.append("R", list(it.item.qubits))
                if self.noise is not None:
                    self.noise(out, it)
            elif kind is Kind.REPEAT:
                first = count[0]
                inner = dict(written)
                body = Text()
                self.items(body, it.body, inner, count, first)
                per = count[0] - first
                if it.count > 1:
                    out.lines.append(f"REPEAT {it.count} {{")
                    out.lines.extend(body.lines)
                    out.lines.append("}")
                else:
                    out.lines.extend(body.lines)
                count[0] = first + it.count * per
                for b, i in inner.items():
                    if i >= first:
                        written[b] = i + (it.count - 1) * per
            else:  # Kind.IF
                self.feed_forward(out, it, written, count[0], start)

    def feed_forward(self, out: Text, noisy: NoisyIf, written: dict[str, int], now: int, start: int) -> None:
        """Pauli feed-forward on one bit (errors of the gates under the if are not modelled here)."""
        it = noisy.item
        if len(it.bits) != 1:
            raise self.fail(it.line, "feed-forward on several bits: the stabilizer path supports one bit")
        bit = it.bits[0]
        then, orelse = self.paulis(noisy.then, it.line), self.paulis(noisy.orelse, it.line)
        if bit not in written:
            if it.value == 0:
                self.apply_paulis(out, then)
            else:
                self.apply_paulis(out, orelse)
            return
        if written[bit] < start:
            raise self.fail(it.line, f"feed-forward from bit {bit}, written before this repeated block: its "
                            "look-back changes every iteration (write the bit inside the block)")
        lookback = now - written[bit]
        # value 1: apply `orelse` always, then (then·orelse) when the bit is 1; value 0: swap the roles
        base, other = (orelse, then) if it.value == 1 else (then, orelse)
        self.apply_paulis(out, base)
        for q in sorted(set(base) | set(other)):
            p = _product(base.get(q, "I"), other.get(q, "I"))
            if p != "I":
                out.append(f"C{p}", [f"rec[{-lookback}]", q])

    def paulis(self, items, line) -> dict[int, str]:
        out: dict[int, str] = {}
        for it in items:
            if kind_of(it, "stabilizer path") is not Kind.LAYER:
                inner = getattr(it, "item", it)
                raise self.fail(line, f"a {item_kind(inner)} inside an if block: the stabilizer path supports Pauli gates there")
            for op in (nop.op for nop in it.operations):
                if op.gate not in _PAULIS or op.params:
                    raise self.fail(op.line or line, f"gate {op.gate} under an if: the stabilizer path supports only x, y, z there")
                for q in op.qubits:
                    out[q] = _product(out.get(q, "I"), _PAULIS[op.gate])
        return {q: p for q, p in out.items() if p != "I"}

    @staticmethod
    def apply_paulis(out: Text, paulis: dict[int, str]) -> None:
        for q, p in sorted(paulis.items()):
            out.append(p, [q])


def _product(a: str, b: str) -> str:
    """Pauli product up to phase."""
    if a == "I":
        return b
    if b == "I" or a == b:
        return a if b == "I" else "I"
    return ({"X", "Y", "Z"} - {a, b}).pop()
