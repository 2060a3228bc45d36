"""Folding virtual-Z corrections into the model's ``z_phase`` values (``budget compensate --out-model``).

A correction rz(φ) on qubit q at the end of a repeated block is the same frame change as adding φ
to the ``z_phase`` of the last gate on q in that block, when that gate (on those qubits) runs
nowhere else in the circuit: the lab then updates that gate's phase correction, and the model's
``z_phase`` of ``[gates.GATE."QUBITS"]`` becomes its current value plus φ. A correction at the end
of the circuit folds the same way when the last gate on q is not inside a repeated block.
Corrections that cannot fold are refused with the reason (write the circuit instead).
"""

from __future__ import annotations

import tomllib
from collections import Counter
from pathlib import Path
from typing import Any

import tomlkit

from budget.analysis.compensate import Correction
from budget.circuit.gates import GATES
from budget.circuit.ir import Operation, StructuredCircuit
from budget.circuit.walk import Kind, kind_of, layers
from budget.errors.model import ErrorModel
from budget.problems import InputError


def _blocks(circuit: StructuredCircuit) -> dict[int | None, tuple]:
    """Block index (pre-order, as :func:`correction_points`) -> its body; None -> the top level."""
    out: dict[int | None, tuple] = {None: circuit.body}

    def walk(items: tuple) -> None:
        for it in items:
            if kind_of(it, "compensation blocks") is Kind.REPEAT:
                out[len(out) - 1] = it.body
                walk(it.body)

    walk(circuit.body)
    return out


def _last_on(items: tuple, qubit: int) -> Operation | None | str:
    """The last operation on ``qubit`` directly in ``items``; ``"nested"`` if it is inside a repeat."""
    for it in reversed(items):
        kind = kind_of(it, "compensation")
        if kind is Kind.LAYER:
            for op in it.operations:
                if qubit in op.qubits:
                    return op
        elif kind is Kind.REPEAT and any(qubit in op.qubits for layer, _ in layers(it.body) for op in layer.operations):
            return "nested"
    return None


def z_phase_updates(circuit: StructuredCircuit, model: ErrorModel,
                    corrections: tuple[Correction, ...]) -> dict[tuple[str, tuple[str, ...]], list[float]]:
    """(gate, qubit names) -> its new z_phase list, one update per correction.

    Raises:
        InputError: a correction that cannot be folded into one gate's z_phase (the reason given).
    """
    blocks = _blocks(circuit)
    counts = Counter((op.gate, op.qubits) for op in circuit.distinct_operations())
    out: dict[tuple[str, tuple[str, ...]], list[float]] = {}
    for k in corrections:
        op = _last_on(blocks[k.block], k.qubit_index)
        if not isinstance(op, Operation):
            why = ("its last gate there is inside a repeated block, where a z_phase would act on every repetition"
                   if op == "nested" else "no gate acts on it there")
            raise InputError(f"correction on {k.qubit} at {k.where} cannot go into a gate's z_phase: {why}; "
                             "write the corrected circuit (--out-circuit) instead")
        if op.gate not in GATES or GATES[op.gate].virtual:
            raise InputError(f"correction on {k.qubit} at {k.where}: the last gate there is {op.gate}, not a "
                             "calibrated gate; write the corrected circuit (--out-circuit) instead")
        if counts[(op.gate, op.qubits)] > 1:
            names = ",".join(circuit.qubits[q] for q in op.qubits)
            raise InputError(f"correction on {k.qubit} at {k.where} cannot go into a gate's z_phase: {op.gate} "
                             f"{names} also runs elsewhere in the circuit; write the corrected circuit "
                             "(--out-circuit) instead")
        names = tuple(circuit.qubits[q] for q in op.qubits)
        key = (op.gate, names)
        if key not in out:
            out[key] = list(model.gate(op.gate, names).z_phase or (0.0,) * len(names))
        out[key][op.qubits.index(k.qubit_index)] += k.angle_rad
    return out


def updated_model_text(model_path: str | Path, updates: dict[tuple[str, tuple[str, ...]], list[float]]) -> str:
    """The model file with the z_phase updates written in (comments and layout kept by tomlkit)."""
    doc = tomlkit.parse(Path(model_path).read_text(encoding="utf-8"))
    gates = doc.setdefault("gates", tomlkit.table(is_super_table=True))
    for (gate, names), values in updates.items():
        table = gates.setdefault(gate, tomlkit.table())
        key = ",".join(names)
        sub = table.get(key)
        if sub is None:
            sub = tomlkit.table()
            table.add(key, sub)
        value: Any = values[0] if len(values) == 1 else [float(v) for v in values]
        sub["z_phase"] = value
        sub["z_phase"].comment("updated by budget compensate (virtual-Z correction folded in)")
    text = tomlkit.dumps(doc)
    ErrorModel.from_dict(tomllib.loads(text), source=str(model_path))  # the result reads back
    return text
