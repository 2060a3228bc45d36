"""State metric, coherent part, with state vectors only (dense matrices only inside repeats).

With ψ_ℓ the ideal state after top-level item ℓ and G_ℓ the item's generator pushed to its end,
H_total ψ = Σ_ℓ R_ℓ G_ℓ ψ_ℓ accumulates by the forward recurrence

    φ <- U_ℓ φ + G_ℓ ψ_ℓ            (one φ per group),

so the first-order quantities Var_ψ(H_total) and the family shares cost a few state-vector passes.
H_total v for an arbitrary v (needed for e^{-iH_total} ψ by Lanczos, :mod:`._krylov`) costs one
backward pass u = U_total† v and one forward pass x <- U_ℓ x, acc <- U_ℓ acc + G_ℓ x.
A top-level repeat is one item: U_ℓ = U_c^N through the cycle's Schur basis and G_ℓ = S_N(H_c),
the periodic closed form of its body's dense generator.

All orders (:meth:`StatePath.noisy_state`): without repeats, the coherent errors themselves
(each operation's exact unitary e^{-i Σ h_P P} after its gate) are applied along the ideal gates,
giving ψ̃ = Ũ|0…0> and the coherent state infidelity 1 - |<ψ|ψ̃>|² = ||ψ̃ - <ψ|ψ̃> ψ||² with every
order of the Magnus series (Blanes, Casas, Oteo & Ros, Phys. Rep. 470, 151 (2009)) included, for
one more state-vector pass.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Hashable

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.matrices.apply import apply
from budget.engines.generators.dense import ContentOf, DensePropagator, noisy_layer
from budget.engines.matrices.periodic import CycleBasis, periodic_sum
from budget.errors.noisy import NoisyCircuit


@dataclass
class _Block:
    basis: CycleBasis
    count: int
    sums: dict[Hashable, np.ndarray]


class StatePath:
    """The circuit's top-level items as state-vector maps (see module docstring)."""

    def __init__(self, circuit: NoisyCircuit, content_of: ContentOf, dense: DensePropagator) -> None:
        self.n = circuit.num_qubits
        self.segments: list = []
        self.items = circuit.body
        keys: list[Hashable] = []
        for item in circuit.body:
            if gate_kind(item, "generators engine") is Kind.LAYER:
                seg = content_of(item)
                new = list(seg.hamiltonians)
            else:
                inner, basis = dense.repeat(item)
                sums = {k: periodic_sum(basis, h, item.count) for k, h in zip(inner.keys, inner.hamiltonians)}
                seg = _Block(basis, item.count, sums)
                new = list(sums)
            keys += [k for k in new if k not in keys]
            self.segments.append(seg)
        self.keys = keys

    def _forward(self, seg, v: np.ndarray) -> np.ndarray:
        if isinstance(seg, _Block):
            return seg.basis.apply_power(seg.count, v)
        for g in seg.gates:
            v = apply(v, g, self.n)
        return v

    def _backward(self, seg, v: np.ndarray) -> np.ndarray:
        if isinstance(seg, _Block):
            return seg.basis.apply_power(-seg.count, v)
        for g in reversed(seg.gates):
            v = apply(v, g.adjoint(), self.n)
        return v

    def _generate(self, seg, key: Hashable | None, v: np.ndarray) -> np.ndarray:
        """G v for one group (key) or all groups (key None)."""
        out = np.zeros_like(v)
        if isinstance(seg, _Block):
            for k, s in seg.sums.items():
                if key is None or k == key:
                    out += s @ v
            return out
        for h in seg.generator if key is None else seg.hamiltonians.get(key, ()):
            out += apply(v, h, self.n)
        return out

    def final_state(self) -> np.ndarray:
        psi = np.zeros(2**self.n, dtype=complex)
        psi[0] = 1.0
        for seg in self.segments:
            psi = self._forward(seg, psi)
        return psi

    def noisy_state(self) -> np.ndarray | None:
        """ψ̃ = Ũ|0…0> with every site's coherent error unitary after the layer's gates (module
        docstring); None when a top-level item is a repeated block (its noisy power is not held)."""
        psi = np.zeros(2**self.n, dtype=complex)
        psi[0] = 1.0
        for item, seg in zip(self.items, self.segments):
            if isinstance(seg, _Block):
                return None
            psi = noisy_layer(self._forward(seg, psi), item, self.n)
        return psi

    def group_vectors(self) -> dict[Hashable, np.ndarray]:
        """key -> H_key,total ψ_final, by the forward recurrence."""
        d = 2**self.n
        psi = np.zeros(d, dtype=complex)
        psi[0] = 1.0
        phi = np.zeros((len(self.keys), d), dtype=complex)
        for seg in self.segments:
            psi = self._forward(seg, psi)
            phi = self._forward(seg, phi)
            for i, key in enumerate(self.keys):
                phi[i] += self._generate(seg, key, psi)
        return dict(zip(self.keys, phi))

    def matvec(self, v: np.ndarray) -> np.ndarray:
        """H_total v (all groups summed)."""
        x = v
        for seg in reversed(self.segments):
            x = self._backward(seg, x)
        pair = np.stack([x, np.zeros_like(v)])  # (x, acc) go through the gates together
        for seg in self.segments:
            pair = self._forward(seg, pair)
            pair[1] += self._generate(seg, None, pair[0])
        return pair[1]
