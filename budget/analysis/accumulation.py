"""Which coherent errors build up over repetitions of a cycle and which are echoed away.

Each coherent knob (family, knob) of one cycle gives a Hamiltonian error H_k pushed to the end of
the cycle (first order, Blume-Kohout et al., "A taxonomy of small Markovian errors", PRX Quantum 3,
020335 (2022)). Over N cycles it sums to S_N(H_k) = Σ_{j<N} U_c^j H_k U_c^{-j} (design.md §4,
:mod:`budget.engines.matrices.periodic`): the part of H_k that commutes with the cycle grows as N ("builds
up", ``growing_rad`` per cycle), the rest stays bounded by ``bounded_rad`` ("echoed away"). Both
are in radians, normalised like a Pauli amplitude, so that knob alone costs
(N · growing)² + b(N)², 0 <= b(N) <= bounded, of process infidelity to first order.

The cycle is propagated densely by the generators engine's propagation (2^n x 2^n matrices, at
most :data:`MAX_QUBITS` qubits); inner repeats use the periodic closed form, so they are not unrolled.
"""

from __future__ import annotations

from dataclasses import dataclass
import numpy as np

from budget.engines.matrices.channels import Grouping, content_cache
from budget.engines.generators.dense import DenseBlock, DensePropagator
from budget.engines.matrices.periodic import accumulation_split, cycle_basis
from budget.errors.noisy import NoisyCircuit, NoisyOperation

MAX_QUBITS = 10
MAX_WORK = 2e7
"""Largest gate applications x 4^n (dense conjugations) for the cycle analysis: about 10 s on the
test machine (the 10-qubit public adder, 137 gates x 4^10, took 66 s; docs/benchmarks.md)."""
_REL_TOL = 1e-9  # relative to the knob's own size per cycle: below this a part counts as absent


@dataclass(frozen=True)
class Component:
    """One coherent knob's behaviour under repetition.

    Attributes:
        name: ``"family.knob"`` (e.g. ``"cz.cphase"``).
        growing_rad: the part that commutes with the cycle, added every cycle.
        bounded_rad: the largest size the rest ever reaches.
    """

    name: str
    growing_rad: float
    bounded_rad: float
    local_rad: float = 1.0

    @property
    def builds_up(self) -> bool:
        return self.growing_rad > _REL_TOL * self.local_rad

    @property
    def behaviour(self) -> str:
        """Plain words: builds up, echoed away, or cancels within each cycle."""
        if self.builds_up:
            onset = self.bounded_rad / self.growing_rad
            return f"builds up, dominant beyond N ≈ {onset:.3g}" if onset > 2 else "builds up (∝ N)"
        if self.bounded_rad > _REL_TOL * self.local_rad:
            return "echoed away (stays bounded)"
        return "cancels within each cycle (to first order)"

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "growing_rad": self.growing_rad,
            "bounded_rad": self.bounded_rad,
            "local_rad": self.local_rad,
            "builds_up": self.builds_up,
            "behaviour": self.behaviour,
        }


@dataclass(frozen=True)
class CycleErrors:
    """A cycle's ideal unitary and each knob's first-order Hamiltonian pushed to the cycle's end.

    Attributes:
        unitary: U_c (d x d).
        names: ``"family.knob"`` per Hamiltonian.
        hamiltonians: shape (K, d, d), H_k in radians (value times propagated unit generator).
        local_rad: per name, Σ over the cycle's operations of the knob's own amplitude
            |value| · sqrt(Σ_P g_P²) before propagation (the scale of "nothing left").
    """

    unitary: np.ndarray
    names: tuple[str, ...]
    hamiltonians: np.ndarray
    local_rad: tuple[float, ...] = ()

    def components(self) -> tuple[Component, ...]:
        """Every knob's split, the largest long-run contributors first."""
        basis = cycle_basis(self.unitary)
        out = [
            Component(name, *accumulation_split(basis, h), local)
            for name, h, local in zip(self.names, self.hamiltonians, self.local_rad)
            if local > 0
        ]
        return tuple(sorted(out, key=lambda c: (-c.growing_rad, -c.bounded_rad, c.name)))


def _op_terms(nop: NoisyOperation) -> list[tuple[str, dict[str, float], float]]:
    """(``"family.knob"``, Pauli generator, knob value) per knob; an operation with a Hamiltonian
    but no knob generators gives ``"family.pauli"`` with its exact Hamiltonian at value 1."""
    if nop.knob_generators:
        return [(f"{nop.family}.{k}", g, float(nop.knob_values.get(k, 0.0))) for k, g in nop.knob_generators.items()]
    if nop.hamiltonian:
        return [(f"{nop.family}.pauli", nop.hamiltonian, 1.0)]
    return []


def _by_knob(nop: NoisyOperation) -> list[tuple[str, dict[str, float]]]:
    """Grouping for :func:`budget.engines.matrices.channels.content_cache`: each knob's Hamiltonian, value
    times generator, under ``"family.knob"``."""
    return [(name, {p: c * scale for p, c in gen.items()}) for name, gen, scale in _op_terms(nop)]


def _propagate(block: NoisyCircuit, grouping: Grouping) -> DenseBlock:
    """The cycle's ideal unitary and each group's Hamiltonian pushed to its end, by the generators
    engine's dense propagation (:class:`budget.engines.generators.dense.DensePropagator`: per layer
    H <- U_L H U_L† + Σ_op H_op; a repeat of N adds U_b^N H U_b^{-N} + S_N(H_b) in closed form)."""
    n = block.num_qubits
    return DensePropagator(n, content_cache(n, grouping)).block(block.body)


def _check_size(block: NoisyCircuit) -> None:
    if block.num_qubits > MAX_QUBITS:
        raise ValueError(f"{block.source}: {block.num_qubits} qubits; the cycle analysis needs at most {MAX_QUBITS}")


def cycle_errors(block: NoisyCircuit) -> CycleErrors:
    """Propagate every knob's first-order Hamiltonian through one cycle (see module docstring).

    Raises:
        ValueError: more than :data:`MAX_QUBITS` qubits.
    """
    _check_size(block)
    dense = _propagate(block, _by_knob)
    u = dense.unitary
    local: dict[str, float] = {}
    for layer, mult in block.multiplicities():
        for nop in layer.sites:
            for name, gen, scale in _op_terms(nop):
                size = abs(scale) * float(np.sqrt(sum(c * c for c in gen.values())))
                local[name] = local.get(name, 0.0) + mult * size
    names = tuple(sorted(dense.keys))
    d = u.shape[0]
    stack = np.array([dense.group(k) for k in names]) if names else np.zeros((0, d, d), dtype=complex)
    return CycleErrors(u, names, stack, tuple(local.get(k, 0.0) for k in names))


def components_or_note(block: NoisyCircuit, metric: str) -> tuple[tuple[Component, ...], str | None]:
    """The components of ``block`` or, when the cycle is too large, none and a note in words."""
    if block.num_qubits > MAX_QUBITS:
        return (), (
            f"which errors build up versus echo away is computed for cycles of up to {MAX_QUBITS} qubits; "
            f"this one has {block.num_qubits}"
        )
    work = sum(len(layer.operations) for layer in block.distinct_layers()) * 4.0**block.num_qubits
    if work > MAX_WORK:
        return (), (
            f"which errors build up versus echo away is left out: the dense cycle analysis of these "
            f"{block.num_qubits} qubits would take about {work / MAX_WORK * 10:.0f} s"
        )
    return cycle_errors(block).components(), None
