"""First-order content of one layer: ideal gates, Hamiltonian generators, jump operators.

The errors are read from the layer's normal form (:func:`budget.errors.normal_form.layer_errors`:
the operations' own errors, idle relaxation, context errors). Each site's error, to first order,
is a small generator (Blume-Kohout et al., "A taxonomy of
small Markovian errors", PRX Quantum 3, 020335 (2022)):

- a Hamiltonian part H_op = Σ h_P P (the exact generator of the coherent unitary,
  ``NoisyOperation.hamiltonian``), grouped by gate family (shares) or by (family, knob)
  (quadratic form);
- jump operators L at probability p (Lindblad form ρ -> ρ + p (L ρ L† - ½{L†L, ρ})):
  stochastic Pauli rates (L = P), depolarizing λ (every non-identity Pauli at λ/d²), and T1/T2
  relaxation (L = σ- = |0><1| at γ, L = Z at (1-c)/2 for the dephasing factor c);
- the first-order process infidelity of the stochastic part, Σ p_P over its Pauli rates; for
  relaxation this is the Pauli twirl p_x + p_y + p_z (Tomita & Svore, PRA 90, 062320 (2014)),
  exact for the process fidelity.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Callable, Iterable

import numpy as np

from budget.engines.matrices.apply import LocalOp, as_rows, fuse
from budget.errors.noisy import NoisyLayer, NoisyOperation
from budget.errors.normal_form import jump_operators, layer_errors, site_stages, stochastic_process
from budget.pauli_algebra import pauli_sum

Grouping = Callable[[NoisyOperation], Iterable[tuple[object, dict[str, float]]]]
"""Maps an operation to (group key, Pauli generator {label: h_P}) pairs whose sum is H_op."""


def by_family(nop: NoisyOperation) -> list[tuple[object, dict[str, float]]]:
    """Group every operation's whole Hamiltonian under its family (used for shares)."""
    return [(nop.family, nop.hamiltonian)] if nop.hamiltonian else []


@dataclass(frozen=True)
class JumpSet:
    """Jump operators acting on one set of qubits (gate order).

    Attributes:
        qubits: the qubits.
        operators: shape (J, dq, dq), the jump operators L.
        decay: shape (J, dq, dq), L†L.
        rates: shape (J,), their probabilities p.
        families: family of each jump, for shares.
    """

    qubits: tuple[int, ...]
    operators: np.ndarray
    decay: np.ndarray
    rates: np.ndarray
    families: tuple[str, ...]

    @cached_property
    def stacked(self) -> np.ndarray:
        """(L_1..L_J, L†L_1..L†L_J) flattened, shape (2J, dq²)."""
        return as_rows(np.concatenate([self.operators, self.decay]))


@dataclass(frozen=True)
class LayerContent:
    """What the first-order engines need from one layer.

    Attributes:
        gates: the ideal gates, fused window by window (:func:`budget.engines.matrices.apply.fuse`), for
            state vectors.
        gate_list: the ideal gates one by one (fewer operations per element for dense matrices).
        hamiltonians: group key -> the group's Hamiltonian terms of this layer, fused into sums.
        generator: all groups' Hamiltonian terms of this layer, fused into sums.
        jumps: jump operators, one set per site (an operation's relaxation embedded in it).
        process_stochastic: family -> first-order process infidelity of the layer's stochastic part.
        stages: (hamiltonians, generator) of each stage of the layer in time order
            (:func:`budget.errors.normal_form.site_stages`: the terms of one stage commute), for
            passes beyond first order; one stage, ``(hamiltonians, generator)``, for most layers.
    """

    gates: tuple[LocalOp, ...]
    gate_list: tuple[LocalOp, ...]
    hamiltonians: dict[object, tuple[LocalOp, ...]]
    generator: tuple[LocalOp, ...]
    jumps: tuple[JumpSet, ...]
    process_stochastic: dict[str, float]
    stages: tuple[tuple[dict[object, tuple[LocalOp, ...]], tuple[LocalOp, ...]], ...] = ()


def _jump_set(qubits, items: list[tuple[np.ndarray, float]], family: str) -> JumpSet:
    ops = np.array([m for m, _ in items], dtype=complex)
    return JumpSet(
        tuple(qubits),
        ops,
        np.conj(np.swapaxes(ops, 1, 2)) @ ops,
        np.array([p for _, p in items], dtype=float),
        (family,) * len(items),
    )


def _fused(terms: dict[object, list], n: int) -> tuple[dict[object, tuple[LocalOp, ...]], tuple[LocalOp, ...]]:
    """(group key -> its terms fused into sums, all groups' terms fused into sums)."""
    hams = {key: fuse(t, n, product=False) for key, t in terms.items()}
    generator = fuse([t for ts in terms.values() for t in ts], n, product=False) if len(terms) > 1 else next(iter(hams.values()), ())
    return hams, generator


def layer_content(layer: NoisyLayer, num_qubits: int, grouping: Grouping = by_family) -> LayerContent:
    """Collect the first-order content of one layer of an n-qubit circuit (module docstring)."""
    n = num_qubits
    ideal = [(nop.op.unitary(), nop.qubits) for nop in layer.operations]
    gates = fuse(ideal, n, product=True)
    sites = layer_errors(layer)
    stage_of = site_stages(sites)
    terms: dict[object, list] = {}
    per_stage: list[dict[object, list]] = [{} for _ in range(stage_of[-1] + 1 if stage_of else 1)]
    jumps: list[JumpSet] = []
    stoch: dict[str, float] = {}
    for errors, stage in zip(sites, stage_of):
        nop, family = errors.source.operation, errors.source.family
        for key, h in grouping(nop) if nop is not None else ():
            if h:
                term = (pauli_sum(h), errors.qubits)
                terms.setdefault(key, []).append(term)
                per_stage[stage].setdefault(key, []).append(term)
        if items := jump_operators(errors):
            jumps.append(_jump_set(errors.qubits, items, family))
        if s := stochastic_process(errors):
            stoch[family] = stoch.get(family, 0.0) + s
    hams, generator = _fused(terms, n)
    stages = ((hams, generator),) if len(per_stage) == 1 else tuple(_fused(t, n) for t in per_stage)
    gate_list = tuple(LocalOp.of(m, qs) for m, qs in ideal)
    return LayerContent(gates, gate_list, hams, generator, tuple(jumps), stoch, stages)


def content_cache(num_qubits: int, grouping: Grouping = by_family) -> Callable[[NoisyLayer], LayerContent]:
    """:func:`layer_content` memoised per layer object (layers recur inside repeats)."""
    cache: dict[int, tuple[NoisyLayer, LayerContent]] = {}

    def content_of(layer: NoisyLayer) -> LayerContent:
        hit = cache.get(id(layer))
        if hit is None:
            hit = cache[id(layer)] = (layer, layer_content(layer, num_qubits, grouping))
        return hit[1]

    return content_of
