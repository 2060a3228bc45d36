"""The same noisy circuit with its coherent knobs set to other values (for closed-loop checks).

Tolerances are found to leading order from the quadratic form e ≈ δᵀAδ + s; checking them means
running an engine on the circuit with every knob *at* its tolerance. :func:`with_knob_values`
rebuilds each operation's coherent unitary, Hamiltonian and knob values from new knob values with
the same code that built them from the error model (:func:`budget.errors.knobs.coherent_error`),
and leaves everything else (ideal gates, incoherent parts, layers, repeats) untouched.

Values are given per row of the quadratic form, (family, knob) -> δ in rad. The rows follow
``budget/errors/knobs.py``: a family's row value is its operations' value, or the largest in
magnitude when they differ; each operation then gets δ · value_op / value_row (the same
proportions as today), or δ itself when the row's value is zero today. Operations whose
Hamiltonian has no knob generators form the knob ``"pauli"``: their Hamiltonian is scaled by δ.
Context errors (spectator ZZ, crosstalk, bleed; budget/errors/context_terms.py) are one-knob
error sites of their layer whose unitary is exp(-i value·K) exactly; they are rebuilt that way.
"""

from __future__ import annotations

import dataclasses
from typing import Mapping

import numpy as np

from budget.circuit.walk import Kind, kind_of
from budget.errors.knobs import PLAIN_KNOB, coherent_error, knob_grouping
from budget.errors.noisy import NoisyCircuit, NoisyIf, NoisyItem, NoisyOperation, NoisyRepeat
from budget.errors.params import GateParams
from budget.memo import ObjectKey
from budget.pauli_algebra import pauli_unitary


def params_from_values(values: Mapping[str, float]) -> GateParams:
    """GateParams holding only the coherent knobs named as in ``GateParams.knob_values``.

    >>> params_from_values({"z_phase[0]": 0.1, "z_phase[1]": -0.2, "cphase": 0.3}).z_phase
    (0.1, -0.2)
    """
    z = sorted((int(k[8:-1]), v) for k, v in values.items() if k.startswith("z_phase["))
    return GateParams(
        overrotation=values.get("overrotation"),
        axis_error=values.get("axis_error"),
        z_phase=tuple(v for _, v in z) if z else ((values["z_phase"],) if "z_phase" in values else None),
        cphase=values.get("cphase"),
        swap_angle=values.get("swap_angle"),
        pauli=tuple((k[6:], v) for k, v in values.items() if k.startswith("pauli:")),
    )


_GATE_KNOBS = ("overrotation", "axis_error", "z_phase", "cphase", "swap_angle")


def _gate_knob(name: str) -> bool:
    """A knob of the gate tables (rebuilt through :func:`coherent_error`), not a context knob."""
    return name in _GATE_KNOBS or name.startswith(("z_phase[", "pauli:"))


def with_knob_values(circuit: NoisyCircuit, values: Mapping[tuple[str, str], float]) -> NoisyCircuit:
    """``circuit`` with the knob rows in ``values`` set to new values (rad); other rows unchanged.

    The structure is kept: an operation object shared by several layers or repeats stays shared.
    """
    _, today = knob_grouping(circuit)
    ops: dict[ObjectKey, NoisyOperation] = {}
    items: dict[ObjectKey, NoisyItem] = {}

    def new_value(family: str, knob: str, old: float) -> float:
        key = (family, knob)
        if key not in values:
            return old
        row = today.get(key, 0.0)
        return float(values[key]) * (old / row if row else 1.0)

    def operation(nop: NoisyOperation) -> NoisyOperation:
        if ObjectKey(nop) in ops:
            return ops[ObjectKey(nop)]
        out = nop
        if nop.knob_generators and any((nop.family, k) in values for k in nop.knob_generators):
            knobs = {k: new_value(nop.family, k, float(nop.knob_values.get(k, 0.0))) for k in nop.knob_generators}
            if nop.op.gate != "unitary" and all(_gate_knob(k) for k in knobs):
                coh = coherent_error(nop.op.gate, nop.op.params, params_from_values(knobs), len(nop.qubits))
                out = dataclasses.replace(nop, coherent=coh.unitary, hamiltonian=dict(coh.hamiltonian), knob_values=knobs)
            else:  # context errors: exp(-i Σ_k value_k K_k), exact for their one-knob error sites
                h: dict[str, float] = {}
                for k, gen in nop.knob_generators.items():
                    for p, c in gen.items():
                        h[p] = h.get(p, 0.0) + knobs[k] * c
                h = {p: c for p, c in h.items() if c != 0}
                u = pauli_unitary(h) if h else np.eye(2 ** len(nop.qubits), dtype=complex)
                out = dataclasses.replace(nop, coherent=u, hamiltonian=h, knob_values=knobs)
        elif not nop.knob_generators and nop.hamiltonian and (nop.family, PLAIN_KNOB) in values:
            scale = new_value(nop.family, PLAIN_KNOB, 1.0)
            h = {p: c * scale for p, c in nop.hamiltonian.items() if c * scale != 0}
            out = dataclasses.replace(nop, coherent=pauli_unitary(h) if h else np.eye(2 ** len(nop.qubits), dtype=complex),
                                      hamiltonian=h)
        ops[ObjectKey(nop)] = out
        return out

    def walk(body: tuple[NoisyItem, ...]) -> tuple[NoisyItem, ...]:
        out = []
        for it in body:
            if ObjectKey(it) not in items:
                kind = kind_of(it, "retune")
                if kind is Kind.LAYER:
                    items[ObjectKey(it)] = it.map_sites(operation)
                elif kind is Kind.REPEAT:
                    items[ObjectKey(it)] = NoisyRepeat(walk(it.body), it.count)
                elif kind is Kind.IF:
                    items[ObjectKey(it)] = NoisyIf(it.item, walk(it.then), walk(it.orelse))
                else:  # measurement and reset: readout and reset errors have no knobs
                    items[ObjectKey(it)] = it
            out.append(items[ObjectKey(it)])
        return tuple(out)

    return dataclasses.replace(circuit, body=walk(circuit.body))

