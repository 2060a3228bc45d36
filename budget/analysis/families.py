"""Families: which operations share a name in the shares, the sensitivities and the tolerances.

An error model is attached with one family per gate name (``"gate"``), per gate and qubit tuple
(``"pair"``) or per operation as written (``"operation"``, :func:`per_operation`); the shares of
a result are then tabulated per family with the number of times each runs (repeats counted
exactly, never unrolled).
"""

from __future__ import annotations

import dataclasses
from typing import Any

from budget.analysis.result import FamilyShare
from budget.circuit.ir import StructuredCircuit
from budget.errors.attach import attach
from budget.errors.noisy import IDLE, NoisyCircuit, NoisyLayer, map_items
from budget.problems import InputError

GROUPINGS = ("gate", "pair", "operation")


def attach_grouped(structured: StructuredCircuit, model: Any, family_by: str = "gate") -> NoisyCircuit:
    """The model attached with families per ``family_by``: ``"gate"`` (gate name), ``"pair"`` (gate
    per qubit tuple) or ``"operation"`` (each operation as written, with its line; the same
    grouping as ``budget tolerances --by-operation``)."""
    if family_by not in GROUPINGS:
        raise InputError(f"family_by = {family_by!r}: expected one of {', '.join(GROUPINGS)}")
    if family_by == "operation":
        return per_operation(attach(structured, model, family_by="gate"))
    return attach(structured, model, family_by=family_by)


def family_table(counts: dict[str, int], shares: dict[str, float]) -> tuple[FamilyShare, ...]:
    """One FamilyShare per family that runs or has a share, largest share first."""
    return tuple(
        FamilyShare(name, counts.get(name, 0), float(shares.get(name, 0.0)))
        for name in sorted(set(counts) | set(shares), key=lambda f: -abs(shares.get(f, 0.0)))
    )


def family_counts(noisy: NoisyCircuit) -> dict[str, int]:
    """Executed operations and context errors per family (idle slots for ``idle``), repeats counted exactly."""
    counts: dict[str, int] = {}
    for layer, mult in noisy.multiplicities():
        for nop in layer.sites:
            counts[nop.family] = counts.get(nop.family, 0) + mult
        idle = sum(1 for r in layer.idle if not r.is_trivial)
        if idle:
            counts[IDLE] = counts.get(IDLE, 0) + idle * mult
    return counts


def per_operation(circuit: NoisyCircuit) -> NoisyCircuit:
    """The same circuit with one family per operation as written, so the engines give A per
    operation: ``"cz q[0],q[1] @12"`` (the family, its qubits in gate order, the source line), with
    ``#k`` added when the line is unknown or holds several such operations. An operation inside a
    repeated block stays one family however often it runs. Context errors (spectator ZZ, crosstalk,
    bleed) keep their family: a coupler has one ZZ rate however many layers it acts in. (Per
    qubit pair: attach the model with ``family_by="pair"``.)
    """
    counter: dict[str, int] = {}

    def name(nop) -> str:
        tag = f"{nop.family} {','.join(circuit.qubits[q] for q in nop.qubits)}"
        if nop.op.line is not None:
            tag += f" @{nop.op.line}"
        counter[tag] = counter.get(tag, 0) + 1
        return tag if nop.op.line is not None and counter[tag] == 1 else f"{tag} #{counter[tag]}"

    def layer(it: NoisyLayer) -> NoisyLayer:
        # context errors (it.context) already name their pair, rule or qubit: one knob each
        return dataclasses.replace(it, operations=tuple(dataclasses.replace(n, family=name(n)) for n in it.operations))

    # measurements and resets are kept: no gate operation to name
    return dataclasses.replace(circuit, body=map_items(circuit.body, layer))
