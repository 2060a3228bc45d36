"""cirq reader: a ``cirq.Circuit`` (object or JSON file) -> :class:`StructuredCircuit`.

Each moment becomes a layer (a moment that holds a gate on three or more qubits becomes the few
layers of its decomposition). Gates equal to a table gate up to global phase get the table name
(``cirq.CZ`` -> ``cz``, ``cirq.rx(θ)`` -> ``rx``, ``cirq.Z**e`` -> ``p``); any other unitary gate
is kept as ``gate="unitary"`` with its matrix and ``label=str(gate)``. A ``cirq.CircuitOperation``
with ``repetitions`` becomes a repeated block (nested ones too, never unrolled); with one
repetition it is inlined. ``cirq.measure`` (key ``m`` on one qubit gives bit ``m``, on k qubits
bits ``m[0]`` .. ``m[k-1]``), ``cirq.ResetChannel`` and operations classically controlled by a
one-bit key become measurement, reset and if items; when every measurement comes last and nothing
else is mid-circuit they become the final readout instead. Qubits are sorted as cirq sorts them and
named by ``str(qubit)`` (``q(3)``, ``q(1, 2)``, ``anc``).
"""

from __future__ import annotations

import json
from pathlib import Path

import cirq
import numpy as np

from budget.circuit.decompose import expand
from budget.circuit.gates import ideal_unitary
from budget.circuit.ir import Measure, Operation, Reset, StructuredCircuit
from budget.circuit.program import MAX_LOOP_COUNT, Barrier, Conditional, Loop, Statement, final_readout
from budget.circuit.source import check_qubit_count, read_text, require_content
from budget.graph import layer_program
from budget.problems import CircuitSyntaxError, InputError, place

_FIXED: tuple[tuple[str, cirq.Gate], ...] = (
    ("id", cirq.I),
    ("x", cirq.X),
    ("y", cirq.Y),
    ("z", cirq.Z),
    ("h", cirq.H),
    ("s", cirq.S),
    ("sdg", cirq.S**-1),
    ("t", cirq.T),
    ("tdg", cirq.T**-1),
    ("sx", cirq.XPowGate(exponent=0.5)),
    ("sxdg", cirq.XPowGate(exponent=-0.5)),
    ("cx", cirq.CNOT),
    ("cy", cirq.ControlledGate(cirq.Y)),
    ("cz", cirq.CZ),
    ("swap", cirq.SWAP),
    ("iswap", cirq.ISWAP),
)
# power gates whose exponent e maps to one table angle π·e (exact or up to global phase)
_POWER: tuple[tuple[type, str], ...] = (
    (cirq.Rx, "rx"),
    (cirq.Ry, "ry"),
    (cirq.Rz, "rz"),
    (cirq.XPowGate, "rx"),
    (cirq.YPowGate, "ry"),
    (cirq.ZPowGate, "p"),
    (cirq.CZPowGate, "cp"),
    (cirq.ZZPowGate, "rzz"),
)
_DECOMPOSED = ((cirq.CCX, "ccx"), (cirq.CSWAP, "cswap"))


def table_gate(gate: cirq.Gate | None) -> tuple[str, tuple[float, ...]] | None:
    """The table name and angles (radians) of a cirq gate, or None when it is not a table gate.

    A match must have the same matrix up to global phase (checked numerically).

    >>> table_gate(cirq.rx(0.25))
    ('rx', (0.25,))
    """
    if gate is None or cirq.is_parameterized(gate) or cirq.num_qubits(gate) > 2:
        return None
    found = None
    for name, g in _FIXED:
        if gate == g:
            found = (name, ())
            break
    else:
        for cls, name in _POWER:
            if isinstance(gate, cls):
                found = (name, (float(gate.exponent) * np.pi,))
                break
    if found is None or not cirq.has_unitary(gate):
        return None
    if not cirq.allclose_up_to_global_phase(ideal_unitary(*found), cirq.unitary(gate), atol=1e-10):
        return None
    return found


def from_cirq(circuit: cirq.AbstractCircuit, source: str = "<cirq.Circuit>") -> StructuredCircuit:
    """The structured form of a cirq circuit (see the module docstring for the mapping).

    Raises:
        CircuitSyntaxError: ``source: moment k: ...`` for unsupported content (unresolved
            parameters, noise channels, a condition on a key of several bits or on an expression,
            a measurement with an inversion mask or confusion map).
    """
    if not isinstance(circuit, cirq.AbstractCircuit):
        raise TypeError(f"from_cirq expects a cirq.Circuit, got {type(circuit).__name__}")
    check_qubit_count(len(circuit.all_qubits()), source)
    qubits = sorted(circuit.all_qubits())
    names = [str(q) for q in qubits]
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise InputError(f"{source}: two qubits share the display name {dup[0]!r}; rename one")
    conv = _Converter({q: i for i, q in enumerate(qubits)}, source)
    program, measured = final_readout(conv.circuit(circuit, "", repeated=False))
    return require_content(layer_program(program, qubits=names, measured=measured, source=source))


def read_cirq_json(path: str | Path) -> StructuredCircuit:
    """Read a circuit saved with ``cirq.to_json``.

    Raises:
        InputError: the file does not exist.
        CircuitSyntaxError: ``file:line: invalid JSON ...``, or the file holds no cirq circuit.
    """
    p = Path(path)
    text = read_text(p)
    try:
        obj = cirq.read_json(json_text=text)
    except json.JSONDecodeError as exc:
        raise CircuitSyntaxError(f"{place(str(p), exc.lineno)}: invalid JSON: {exc.msg}") from None
    except Exception as exc:  # cirq raises ValueError/KeyError/TypeError for unknown or bad objects
        raise CircuitSyntaxError(f"{p}: not a cirq JSON circuit: {exc}") from None
    if not isinstance(obj, cirq.AbstractCircuit):
        raise CircuitSyntaxError(f"{p}: holds a {type(obj).__name__}, expected a cirq.Circuit")
    return from_cirq(obj, source=str(p))


class _Converter:
    def __init__(self, index: dict[cirq.Qid, int], source: str) -> None:
        self.index = index
        self.source = source
        self.key_sizes: dict[str, int] = {}  # measurement key -> number of qubits it records

    def error(self, where: str, what: str) -> CircuitSyntaxError:
        return CircuitSyntaxError(f"{self.source}: {where}: {what}")

    def circuit(self, circuit: cirq.AbstractCircuit, prefix: str, *, repeated: bool) -> list[Statement]:
        out: list[Statement] = []
        for k, moment in enumerate(circuit):
            where = f"{prefix}moment {k}"
            subs: list[Statement] = []
            for op in moment:
                op = op.untagged
                if isinstance(op, cirq.CircuitOperation):
                    subs.extend(self.subcircuit(op, where, repeated=repeated))
                else:
                    out.extend(self.operation(op, where, repeated=repeated))
            out.extend(subs)
            out.append(Barrier())
        return out

    def subcircuit(self, op: cirq.CircuitOperation, where: str, *, repeated: bool) -> list[Statement]:
        if op.repeat_until is not None:
            raise self.error(
                where, "CircuitOperation with repeat_until (a measurement-dependent loop): not supported"
            )
        reps = op.repetitions
        if not isinstance(reps, (int, np.integer)):
            raise self.error(where, f"CircuitOperation repetitions = {reps!r}: expected an integer")
        if abs(reps) > MAX_LOOP_COUNT:
            raise self.error(where, f"CircuitOperation repetitions = {reps:,}: at most 10**18 (as for --cycles)")
        body = op.circuit.unfreeze().transform_qubits(lambda q: op.qubit_map.get(q, q))
        body = cirq.resolve_parameters(body, op.param_resolver)
        if op.measurement_key_map:
            body = cirq.with_measurement_key_mapping(body, dict(op.measurement_key_map))
        if reps < 0:  # negative repetitions run the inverse circuit
            body = cirq.inverse(body)
        stmts = self.circuit(body, f"{where} > CircuitOperation ", repeated=repeated or abs(reps) > 1)
        return stmts if abs(reps) == 1 else [Loop(tuple(stmts), int(abs(reps)))]

    def operation(self, op: cirq.Operation, where: str, *, repeated: bool) -> list[Statement]:
        if isinstance(op.gate, cirq.MeasurementGate):
            return self.measure(op, where)
        if isinstance(op.gate, cirq.ResetChannel):
            return [Reset((self.index[op.qubits[0]],))]
        if isinstance(op, cirq.ClassicallyControlledOperation):
            return [self.controlled(op, where, repeated=repeated)]
        if cirq.is_parameterized(op):
            raise self.error(where, f"operation {op} has unresolved parameters; call cirq.resolve_parameters first")
        if not op.qubits:
            return []  # global phase: no observable effect
        try:
            with np.errstate(all="ignore"):  # larger operations are decomposed (self.large), not built whole
                matrix = cirq.unitary(op, None) if len(op.qubits) <= 2 else (True if cirq.has_unitary(op) else None)
        except (ArithmeticError, ValueError) as exc:  # cirq on an infinite exponent: ZeroDivisionError
            raise self.error(where, f"operation {op}: its matrix cannot be computed ({exc})") from None
        if isinstance(matrix, np.ndarray) and not np.isfinite(matrix).all():
            raise self.error(where, f"operation {op}: its matrix has entries that are not finite numbers "
                             "(an angle or exponent of inf or nan)")
        if matrix is None:
            raise self.error(
                where,
                f"operation {op} is not unitary (reset, noise channel or similar); "
                "errors belong in the error model, not in the circuit",
            )
        qs = tuple(self.index[q] for q in op.qubits)
        if len(qs) > 2:
            return self.large(op, qs, where, repeated=repeated)
        found = table_gate(op.gate)
        if found is not None:
            return [Operation(found[0], qs, found[1])]
        label = str(op.gate) if op.gate is not None else str(op)
        return [Operation("unitary", qs, label=label, matrix=matrix.astype(complex))]

    def measure(self, op: cirq.Operation, where: str) -> list[Statement]:
        gate = op.gate
        if any(gate.full_invert_mask()) or gate.confusion_map:
            raise self.error(where, f"measurement {op} with an inversion mask or confusion map is not supported")
        key = cirq.measurement_key_name(op)
        self.key_sizes[key] = len(op.qubits)
        bits = [key] if len(op.qubits) == 1 else [f"{key}[{k}]" for k in range(len(op.qubits))]
        return [Measure((self.index[q],), (b,)) for q, b in zip(op.qubits, bits)]

    def controlled(self, op: cirq.ClassicallyControlledOperation, where: str, *, repeated: bool) -> Conditional:
        """An operation run when every condition holds; each must be a one-bit measurement key."""
        bits = []
        for cond in op.classical_controls:
            if not isinstance(cond, cirq.KeyCondition) or self.key_sizes.get(str(cond.key), 1) != 1:
                raise self.error(
                    where, f"condition {cond} of {op}: only a measurement key of one qubit is supported"
                )
            bits.append(str(cond.key))
        inner = op.without_classical_controls()
        body = self.operation(inner, where, repeated=repeated)
        return Conditional(tuple(bits), 2 ** len(bits) - 1, tuple(body))

    def large(self, op: cirq.Operation, qs: tuple[int, ...], where: str, *, repeated: bool) -> list[Operation]:
        """A gate on three or more qubits: the table decomposition for CCX/CSWAP, else cirq's."""
        for gate, name in _DECOMPOSED:
            if op.gate == gate:
                return [Operation(g, where_qs, angles) for g, angles, where_qs in expand(name, (), qs)]
        parts = cirq.decompose(op, keep=lambda o: len(o.qubits) <= 2, on_stuck_raise=None)
        if any(len(p.qubits) > 2 for p in parts):
            raise self.error(where, f"operation {op} acts on {len(qs)} qubits and cirq cannot decompose it")
        return [o for p in parts for o in self.operation(p, where, repeated=repeated)]
