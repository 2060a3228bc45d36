"""A Clifford circuit with measurements as a stim circuit (repeats kept as REPEAT blocks).

stim (Gidney, Quantum 5, 497 (2021)) simulates stabilizer circuits with measurement, reset and
Pauli feed-forward at scale. This module writes a :class:`~budget.circuit.ir.StructuredCircuit`
in its language: each distinct gate becomes the stim gates of its tableau
(``stim.Tableau.from_unitary_matrix`` then ``to_circuit``), a measurement ``M``, a reset ``R``, a
repeat ``REPEAT``. Feed-forward is a Pauli (any gates whose product is a Pauli string) controlled
by the latest outcome of one bit (``CX rec[-k] q``; a condition on a register reduces to the bits
written so far, which must be one); a repeated block is a REPEAT from the iteration on which the
look-back ``k`` stays the same (:meth:`_Writer.repeat`). Noise is added by the caller through a callback per item.

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
from budget.pauli_algebra import multiply
from budget.problems import InputError, place

@dataclass(frozen=True)
class Conditioned:
    """A feed-forward whose branch depends on the recorded bit ``rec[-lookback]``: ``then`` runs
    when it reads ``want``, ``orelse`` otherwise (given to the noise callback after its gates)."""

    item: NoisyIf
    lookback: int
    want: int


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
    _Writer(circuit.source, noise, readout).items(out, circuit.body, {}, [0])
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

    def items(self, out: Text, items, written: dict[str, int], count: list[int]) -> None:
        """Write items; ``written``: bit -> record index of its latest write; ``count``: [records so far]."""
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
                self.repeat(out, it, written, count)
            else:  # Kind.IF
                self.feed_forward(out, it, written, count[0])

    def repeat(self, out: Text, it: NoisyRepeat, written: dict[str, int], count: list[int]) -> None:
        """A repeated block as stim's REPEAT when its iterations read alike.

        Iterations are written one after the other until two consecutive ones are the same text
        (a feed-forward's look-back ``rec[-k]`` is then the same in every later one, because each
        iteration writes the same bits): the first iteration may differ (it reads bits written
        before the block, or none), so it is written on its own and the rest as one REPEAT. A block
        that reads a bit written before it and never rewritten has a growing look-back: it is
        written out iteration by iteration, up to :data:`MAX_UNROLLED_LINES` lines.
        """
        texts: list[list[str]] = []
        done = 0
        while done < it.count:
            body = Text()
            self.items(body, it.body, written, count)
            texts.append(body.lines)
            done += 1
            if len(texts) >= 3 and texts[-1] != texts[-2]:
                if it.count * len(texts[-1]) > MAX_UNROLLED_LINES:
                    raise self.fail(_first_line(it), "feed-forward inside a repeated block from a bit written before it "
                                    "and not rewritten in it: the look-back changes every iteration, and the "
                                    f"{it.count:,} iterations exceed the {MAX_UNROLLED_LINES:,} lines the stabilizer "
                                    "path writes out (rewrite the bit inside the block, or use fewer iterations)")
                continue
            if len(texts) >= 2 and texts[-1] == texts[-2] and done < it.count:
                break
        if done == it.count:
            for lines in texts:
                out.lines.extend(lines)
            return
        # iterations from the second (or the first) on are alike: the rest repeat the last text
        per = self._records(texts[-1])
        rest = it.count - done
        first_alike = len(texts) - 2
        while first_alike > 0 and texts[first_alike - 1] == texts[-1]:
            first_alike -= 1
        for lines in texts[:first_alike]:
            out.lines.extend(lines)
        out.lines.append(f"REPEAT {len(texts) - first_alike + rest} {{")
        out.lines.extend(texts[-1])
        out.lines.append("}")
        shift = rest * per
        mark = count[0] - per
        for b, i in written.items():
            if i >= mark:
                written[b] = i + shift
        count[0] += shift

    @staticmethod
    def _records(lines: list[str]) -> int:
        """Records written by a block of stim text (measurement targets, repeats counted)."""
        return stim.Circuit("\n".join(lines)).num_measurements

    def feed_forward(self, out: Text, noisy: NoisyIf, written: dict[str, int], now: int) -> None:
        """Pauli feed-forward on one recorded bit (stim's ``CX rec[-k] q``); bits never written read
        0, so a condition on a register reduces to its written bits (a branch they decide is written
        as plain gates with their noise). A conditioned branch reaches the noise callback as a
        :class:`Conditioned` item after its gates (stim has no conditioned noise: the twirled path
        leaves those errors out, the coherent classes include its coherent errors)."""
        it = noisy.item
        live = [(k, b) for k, b in enumerate(it.bits) if b in written]
        fixed = all((it.value >> k) & 1 == 0 for k, b in enumerate(it.bits) if b not in written)
        if not fixed or not live:  # decided by bits never written (they read 0): the branch always runs
            taken = fixed and it.value == 0
            self.items(out, noisy.then if taken else noisy.orelse, written, [now])
            return
        then, orelse = self.paulis(noisy.then, it.line), self.paulis(noisy.orelse, it.line)
        if len(live) > 1:
            names = ", ".join(b for _, b in live)
            raise self.fail(it.line, f"feed-forward on {len(live)} recorded bits ({names}): the condition is an AND of "
                            "outcomes, and the stabilizer path (stim) conditions a Pauli on one recorded bit only; "
                            "--metric record runs such circuits on the exact engine")
        k, bit = live[0]
        want = (it.value >> k) & 1
        lookback = now - written[bit]
        # want 1: apply `orelse` always, then (then·orelse) when the bit is 1; want 0: swap the roles
        base, other = (orelse, then) if want == 1 else (then, orelse)
        self.apply_paulis(out, base)
        for q in sorted(set(base) | set(other)):
            p = _product(base.get(q, "I"), other.get(q, "I"))
            if p != "I":
                out.append(f"C{p}", [f"rec[{-lookback}]", q])
        if self.noise is not None:
            self.noise(out, Conditioned(noisy, lookback, want))

    def paulis(self, items, line) -> dict[int, str]:
        """The Pauli (up to phase) that a branch applies: any gates whose product is a Pauli string
        (x, y, z, rx(π), p(π), u3(π, 0, π), ...)."""
        out: dict[int, str] = {}
        for it in items:
            if kind_of(it, "stabilizer path") is not Kind.LAYER:
                inner = getattr(it, "item", it)
                raise self.fail(line, f"a {item_kind(inner)} inside an if block: the stabilizer path supports gates "
                                "that apply a Pauli there")
            for op in (nop.op for nop in it.operations):
                for q, p in as_pauli(op).items() if as_pauli(op) is not None else self._not_pauli(op, line):
                    out[q] = _product(out.get(q, "I"), p)
        return {q: p for q, p in out.items() if p != "I"}

    def _not_pauli(self, op: Operation, line):
        raise self.fail(op.line or line, f"gate {op.gate}{list(op.params) or ''} under an if is not a Pauli: stim "
                        "conditions only Pauli gates on a recorded bit (a conditioned Clifford would change the "
                        "stabilizer tableau per shot); --metric record runs it on the exact engine")

    @staticmethod
    def apply_paulis(out: Text, paulis: dict[int, str]) -> None:
        for q, p in sorted(paulis.items()):
            out.append(p, [q])


MAX_UNROLLED_LINES = 2_000_000
"""Longest stim text written for a repeated block whose iterations differ (growing look-back)."""


def _first_line(it: NoisyRepeat) -> int | None:
    for x in it.body:
        inner = getattr(x, "item", x)
        line = getattr(inner, "line", None)
        if line is not None:
            return line
        if isinstance(x, NoisyLayer) and x.operations:
            return x.operations[0].op.line
    return None


def as_pauli(op: Operation) -> dict[int, str] | None:
    """The Pauli string (qubit -> letter, identity left out) an operation applies up to phase, or
    None when it is not a Pauli (stim's tableau of its unitary)."""
    try:
        tab = stim.Tableau.from_unitary_matrix(np.asarray(op.unitary(), dtype=complex), endian="big")
        ps = tab.to_pauli_string()
    except ValueError:
        return None
    return {q: "_XYZ"[ps[k]] for k, q in enumerate(op.qubits) if ps[k]}


def _product(a: str, b: str) -> str:
    """Pauli product up to phase."""
    return multiply(a, b)[1]
