"""Family shares of an exact value: each family's errors alone, scaled to the joint value.

The exact engine's value e is not a sum over families, so it is split by isolation: e_f is the
exact infidelity of the same circuit with only family f's errors switched on (every other
operation ideal, idle relaxation only for the family ``"idle"``), and

    share_f = e_f · e / Σ_g e_g,

so the shares add up to e and each is at least 0. Σ_g e_g differs from e by the interference
between families: coherent errors of two families that land on the same operator add in amplitude
(e > Σ e_g) or cancel (e < Σ e_g); incoherent errors add to first order. The split keeps each
family's weight as it is alone and spreads the interference in proportion; the record
(:class:`budget.engines.details.FamilySplit`) keeps Σ e_g beside e. For a single family the share
is e itself and nothing runs again.

Cost: one exact run per family with errors, each in the form its own errors need (a family with
only coherent errors runs as a state vector or unitary); the engine's time estimate counts them.
This is the one-at-a-time attribution of sensitivity analysis (Saltelli et al., "Global
Sensitivity Analysis: The Primer", Wiley 2008, ch. 1; recalled from memory), with the parts
rescaled to the joint value as the first-order engines rescale theirs.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from budget.circuit.walk import unsupported_item
from budget.memo import ObjectKey
from budget.errors.noisy import IDLE, NoisyCircuit, NoisyLayer, NoisyOperation, map_items

SHARE_METHOD = "isolation: each family's errors alone, scaled to the joint value"


def error_families(circuit: NoisyCircuit) -> tuple[str, ...]:
    """The families that carry an error (in order of first appearance); ``"idle"`` when an idle
    slot relaxes."""
    seen: dict[str, None] = {}
    for layer in circuit.distinct_layers():
        for nop in layer.sites:
            if nop.has_coherent or nop.has_incoherent:
                seen.setdefault(nop.family, None)
        if any(not r.is_trivial for r in layer.idle):
            seen.setdefault(IDLE, None)
    return tuple(seen)


def only_family(circuit: NoisyCircuit, family: str) -> NoisyCircuit:
    """``circuit`` with the errors of every family but ``family`` removed (ideal gates kept, so
    the ideal circuit is unchanged); repeats stay folded."""
    cache: dict[ObjectKey, NoisyOperation] = {}

    def operation(nop: NoisyOperation) -> NoisyOperation:
        if nop.family == family:
            return nop
        out = cache.get(ObjectKey(nop))
        if out is None:
            d = 2 ** len(nop.qubits)
            out = cache[ObjectKey(nop)] = dataclasses.replace(
                nop, coherent=np.eye(d, dtype=complex), hamiltonian={}, pauli_rates={}, depolarizing=0.0, relaxation=(),
                knob_generators={}, knob_values={},
            )
        return out

    def layer(it: NoisyLayer) -> NoisyLayer:
        idle = it.idle if family == IDLE else ()
        return it.map_sites(operation, idle=idle)

    def probe(it):  # the exact engine refuses mid-circuit items before it splits
        raise unsupported_item(it, "only_family (gate layers and repeats only)")

    return NoisyCircuit(circuit.qubits, map_items(circuit.body, layer, probe), dict(circuit.readout_error), circuit.source)


def scaled_shares(isolated: dict[str, float], total: float) -> dict[str, float]:
    """share_f = e_f · total / Σ e_g (see the module docstring); equal parts when every e_f is 0
    at rounding level but the total is not."""
    s = sum(isolated.values())
    if total == 0.0:
        return {f: 0.0 for f in isolated}
    if s <= 0.0:
        return {f: total / len(isolated) for f in isolated}
    return {f: v * total / s for f, v in isolated.items()}

