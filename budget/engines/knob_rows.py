"""Group Hamiltonian errors by (family, knob) for the quadratic form (design.md §5).

To first order each operation's Hamiltonian is H_op ≈ Σ_knob value_knob · K_knob
(``NoisyOperation.knob_generators``, ``knob_values``; Blume-Kohout et al., PRX Quantum 3, 020335
(2022)). One row of the quadratic form per (family, knob) with value δ: the value all of the
family's operations share, or the largest in magnitude when they differ. Each operation enters that
row with its generator scaled by value_op / δ, so δ times the row's propagated generator is exactly
the family's first-order Hamiltonian for that knob (δ = 0: unit generators, for sensitivity only).
Operations with a Hamiltonian but no knob generators form the knob ``"pauli"`` with δ = 1.
"""

from __future__ import annotations

from typing import Callable

from budget.errors.noisy import NoisyCircuit, NoisyOperation

PLAIN_KNOB = "pauli"


def _knob_terms(nop: NoisyOperation) -> list[tuple[str, dict[str, float], float]]:
    if nop.knob_generators:
        return [(k, g, float(nop.knob_values.get(k, 0.0))) for k, g in nop.knob_generators.items()]
    if nop.hamiltonian:
        return [(PLAIN_KNOB, nop.hamiltonian, 1.0)]
    return []


def knob_grouping(
    circuit: NoisyCircuit,
) -> tuple[Callable[[NoisyOperation], list[tuple[object, dict[str, float]]]], dict[tuple[str, str], float]]:
    """(grouping for :func:`budget.engines.matrices.channels.layer_content`, (family, knob) -> δ in rad)."""
    values: dict[tuple[str, str], float] = {}
    for layer in circuit.distinct_layers():
        for nop in layer.operations:
            for knob, _, v in _knob_terms(nop):
                key = (nop.family, knob)
                if key not in values or abs(v) > abs(values[key]):
                    values[key] = v

    def grouping(nop: NoisyOperation) -> list[tuple[object, dict[str, float]]]:
        out = []
        for knob, gen, v in _knob_terms(nop):
            key = (nop.family, knob)
            scale = v / values[key] if values[key] else 1.0
            out.append((key, {p: c * scale for p, c in gen.items()}))
        return out

    return grouping, values
