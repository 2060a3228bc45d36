"""Dense propagation of Hamiltonian generators to the end of a block (Heisenberg-type picture).

For a sequence of items, every operation's Hamiltonian error H_op is pushed to the end of the
sequence by the ideal remainder: H_total = Σ R H_op R†. Layer by layer this is the recurrence

    H <- U_layer H U_layer† + Σ_{op in layer} H_op,

kept per group (family, or (family, knob)), so that groups add in amplitude afterwards. A repeated
block contributes U_c^N H U_c^{-N} + S_N(H_c) through the periodic closed form
(:mod:`budget.engines.periodic`); nested repeats recurse. Dense d x d matrices: the cost is
O(d² · gates) per layer and O(d³) per repeat, independent of the repeat count.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Hashable

import numpy as np

from budget.engines._apply import apply, conjugate, embed
from budget.engines._channels import LayerContent
from budget.engines.periodic import CycleBasis, cycle_basis, periodic_sum
from budget.errors.noisy import NoisyItem, NoisyLayer, NoisyRepeat

ContentOf = Callable[[NoisyLayer], LayerContent]


@dataclass
class DenseBlock:
    """A block's ideal unitary and its summed Hamiltonian errors pushed to its end.

    Attributes:
        unitary: the ideal unitary of the block (d x d), or None when not requested.
        keys: group keys, one per row of ``hamiltonians``.
        hamiltonians: shape (G, d, d), H_total of each group.
    """

    unitary: np.ndarray | None
    keys: list[Hashable]
    hamiltonians: np.ndarray

    def total(self) -> np.ndarray:
        d = self.hamiltonians.shape[-1]
        return self.hamiltonians.sum(axis=0) if self.keys else np.zeros((d, d), dtype=complex)

    def group(self, key: Hashable) -> np.ndarray | None:
        return self.hamiltonians[self.keys.index(key)] if key in self.keys else None


class DensePropagator:
    """Pushes Hamiltonian generators through items; caches each repeat's Schur basis.

    Args:
        num_qubits: n (d = 2**n).
        content_of: the layer's first-order content (gates, grouped Hamiltonians).
    """

    def __init__(self, num_qubits: int, content_of: ContentOf) -> None:
        self.n = num_qubits
        self.content_of = content_of
        self._blocks: dict[int, tuple[DenseBlock, CycleBasis]] = {}  # id(body) -> block, basis
        self._bodies: list[tuple] = []  # keeps the cached bodies alive, so their ids stay unique

    def block(self, items: tuple[NoisyItem, ...], *, with_unitary: bool = True) -> DenseBlock:
        """The :class:`DenseBlock` of ``items`` (see module docstring)."""
        n, d = self.n, 2**self.n
        ut = np.eye(d, dtype=complex) if with_unitary else None  # holds U^T: rows are columns of U
        keys: list[Hashable] = []
        hs = np.zeros((0, d, d), dtype=complex)

        def grow(new_keys) -> np.ndarray:
            extra = [k for k in new_keys if k not in keys]
            keys.extend(extra)
            return np.concatenate([hs, np.zeros((len(extra), d, d), dtype=complex)]) if extra else hs

        for item in items:
            if isinstance(item, NoisyLayer):
                c = self.content_of(item)
                for g in c.gate_list:
                    hs = conjugate(hs, g, n) if len(keys) else hs
                    if ut is not None:
                        ut = apply(ut, g, n)
                hs = grow(c.hamiltonians)
                for key, terms in c.hamiltonians.items():
                    i = keys.index(key)
                    for h in terms:
                        hs[i] += embed(h.matrix, h.qubits, n)
            else:
                inner, basis = self.repeat(item)
                p = basis.power(item.count)
                hs = p @ hs @ p.conj().T if len(keys) else hs
                if ut is not None:
                    ut = ut @ p.T
                hs = grow(inner.keys)
                for key, h in zip(inner.keys, inner.hamiltonians):
                    hs[keys.index(key)] += periodic_sum(basis, h, item.count)
        return DenseBlock(None if ut is None else ut.T.copy(), keys, hs)

    def repeat(self, item: NoisyRepeat) -> tuple[DenseBlock, CycleBasis]:
        """The body's dense block and the Schur basis of its unitary (cached per body: repeats of
        one body with different counts share it)."""
        key = id(item.body)
        if key not in self._blocks:
            inner = self.block(item.body)
            self._blocks[key] = (inner, cycle_basis(inner.unitary))
            self._bodies.append(item.body)
        return self._blocks[key]
