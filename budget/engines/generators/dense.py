"""Dense propagation of Hamiltonian generators to the end of a block (Heisenberg-type picture).

For a sequence of items, every operation's Hamiltonian error H_op is pushed to the end of the
sequence by the ideal remainder: H_total = Σ R H_op R†. Layer by layer this is the recurrence

    H <- U_layer H U_layer† + Σ_{op in layer} H_op,

kept per group (family, or (family, knob)), so that groups add in amplitude afterwards. A repeated
block contributes U_c^N H U_c^{-N} + S_N(H_c) through the periodic closed form
(:mod:`budget.engines.matrices.periodic`); nested repeats recurse. Dense d x d matrices: the cost is
O(d² · gates) per layer and O(d³) per repeat, independent of the repeat count.

Second order (``second_order=True``). The errors of a sequence, pushed to its end, are
e^{-iG_M} ⋯ e^{-iG_1} (G_k after G_j for k > j), and their product is e^{-iH} with, to second
order in the error angles (Magnus expansion / BCH formula: Blanes, Casas, Oteo & Ros, Phys. Rep.
470, 151 (2009); average Hamiltonian theory: Haeberlen & Waugh, Phys. Rev. 175, 453 (1968)),

    H = Σ_k G_k - (i/2) Σ_{j<k} [G_k, G_j].

Layer by layer: when a layer's generator B joins the generator A of everything before it (already
pushed through the layer's gates), H <- A + B - (i/2)[B, A]; the operations of one layer act on
disjoint qubits and commute. A repeated block adds, besides S_N(H_c), the commutators between its
cycles, C_N(H_c, H_c) (:func:`budget.engines.matrices.periodic.cross_cycle_sum`), and joins what came before
in the same way. This matters where the first-order terms cancel (echoes, a gate and its inverse):
then the commutator term leads and, repeated, builds up as N ε². A commutator term between groups f
and g counts half in each; the commutators between cycles are split in proportion to the groups'
sizes (so groups still add up to H). Cost: O(d² · terms · groups) per layer
and O(groups · d³) per repeat, still independent of the repeat count.

With the second order, every block goes one step further: its noisy unitary Ũ is formed alongside
the ideal one U (repeats through the Schur basis of the noisy body, like the ideal one), and the
generator of E = Ũ U† (exact, i log E, principal branch) replaces H_1 + H_2; the difference
(third and higher orders) joins the groups in proportion to their first-order sizes, so the
groups still add up to the whole. So an echoed cycle whose second order vanishes on the state
(x/y/x/y on |0>, where H_2 ∝ Z) still gets its leading term, and so does a cycle that echoes its
own first order away while the commutators between cycles build up. Where E is too far from the
identity for the principal branch (an eigenphase beyond π/2 from the mean), H_1 + H_2 stands.
Cost: one more d x d product per gate and one more Schur decomposition per repeated body.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Hashable

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.matrices.apply import LocalOp, apply, conjugate, embed
from budget.engines.matrices.channels import LayerContent
from budget.engines.matrices.periodic import CycleBasis, cross_cycle_sum, cycle_basis, periodic_sum, principal_generator
from budget.errors.noisy import NoisyItem, NoisyLayer, NoisyRepeat
from budget.errors.normal_form import layer_errors
from budget.memo import ObjectKey

MAX_DENSE_QUBITS = 11
"""Dense d x d matrices (process metric, repeated blocks, observables with incoherent errors)."""

ContentOf = Callable[[NoisyLayer], LayerContent]


def local_commutator(ops: tuple[LocalOp, ...], dense: np.ndarray, num_qubits: int) -> np.ndarray:
    """[B, M] for B = Σ ``ops`` (local operators) and each matrix M of ``dense`` (shape (..., d, d)),
    without forming B: B M acts on the row qubits of vec(M), M B with Bᵀ on its column qubits."""
    n = num_qubits
    shape = dense.shape
    flat = dense.reshape(-1, 4**n)
    out = np.zeros_like(flat)
    for op in ops:
        out += apply(flat, op, 2 * n)
        out -= apply(flat, LocalOp.of(op.matrix.T, tuple(q + n for q in op.qubits)), 2 * n)
    return out.reshape(shape)


def _coherent(items: tuple[NoisyItem, ...]) -> bool:
    """Whether any operation of ``items`` (repeats included) has a coherent error."""
    return any(
        any(e.hamiltonian for e in layer_errors(it)) if gate_kind(it, "generators engine") is Kind.LAYER else _coherent(it.body)
        for it in items
    )


def noisy_layer(state: np.ndarray, layer: NoisyLayer, n: int) -> np.ndarray:
    """``state`` (vectors or matrices, last axis the register) after the coherent unitary of every
    site of the layer's normal form that has Hamiltonian terms, in channel order (the ideal gates
    already applied)."""
    for e in layer_errors(layer):
        if e.hamiltonian and e.unitary is not None:
            state = apply(state, LocalOp.of(e.unitary, e.qubits), n)
    return state


def _exact_remainder(hs: np.ndarray, error: np.ndarray) -> tuple[np.ndarray, bool]:
    """Replace the second-order generator of a block by the exact one.

    ``error`` is E = Ũ U† (the coherent errors pushed to the block's end, exact); its generator
    H = i log E (:func:`budget.engines.matrices.periodic.principal_generator`) differs from H_1 + H_2 by
    third and higher orders. That remainder R (traceless) joins the groups' second parts in
    proportion to the sizes of their first-order parts. Skipped when E is too far from the
    identity for the principal branch."""
    exact = principal_generator(error)
    if exact is None:
        return hs, False
    d = error.shape[0]
    total = hs.sum(axis=(0, 1))
    total = total - np.trace(total) / d * np.eye(d)
    rest = exact - total
    sizes = np.array([np.linalg.norm(h) for h in hs[0]])
    weights = sizes / sizes.sum() if sizes.sum() > 0 else np.full(len(sizes), 1.0 / len(sizes))
    hs = hs.copy()
    hs[1] += weights[:, None, None] * rest
    return hs, True


def cycle_second_order(basis: CycleBasis, hs: np.ndarray, count: int) -> np.ndarray:
    """C_N(H, H) (H = Σ_f H_f), the commutators between the cycles of N repetitions, split
    between the groups in proportion to the sizes ||H_f|| (one closed form for all groups: a split
    by participants would cost two closed forms per group)."""
    total = cross_cycle_sum(basis, hs.sum(axis=0), hs.sum(axis=0), count)
    sizes = np.array([np.linalg.norm(h) for h in hs])
    weights = sizes / sizes.sum() if sizes.sum() > 0 else np.full(len(sizes), 1.0 / len(sizes))
    return weights[:, None, None] * total


@dataclass
class DenseBlock:
    """A block's ideal unitary and its summed Hamiltonian errors pushed to its end.

    Attributes:
        unitary: the ideal unitary of the block (d x d), or None when not requested.
        keys: group keys, one per row of ``hamiltonians``.
        hamiltonians: shape (G, d, d), H_total of each group.
        second: shape (G, d, d), the part of ``hamiltonians`` that comes from the second-order
            (commutator) terms; zeros without the second order.
    """

    unitary: np.ndarray | None
    keys: list[Hashable]
    hamiltonians: np.ndarray
    second: np.ndarray | None = None
    noisy: np.ndarray | None = None
    """With the second order: the block's unitary including its coherent errors."""
    all_orders: bool = False
    """Whether the generator is the exact one (i log of the error unitary), not H_1 + H_2."""

    def total(self) -> np.ndarray:
        d = self.hamiltonians.shape[-1]
        return self.hamiltonians.sum(axis=0) if self.keys else np.zeros((d, d), dtype=complex)

    def second_total(self) -> np.ndarray:
        """Σ_g of :attr:`second` (the whole second-order term)."""
        d = self.hamiltonians.shape[-1]
        return self.second.sum(axis=0) if self.keys and self.second is not None else np.zeros((d, d), dtype=complex)

    def group(self, key: Hashable) -> np.ndarray | None:
        return self.hamiltonians[self.keys.index(key)] if key in self.keys else None


class DensePropagator:
    """Pushes Hamiltonian generators through items; caches each repeat's Schur basis.

    Args:
        num_qubits: n (d = 2**n).
        content_of: the layer's first-order content (gates, grouped Hamiltonians).
        second_order: add the second-order (commutator) terms (module docstring).
    """

    def __init__(self, num_qubits: int, content_of: ContentOf, *, second_order: bool = False) -> None:
        self.n = num_qubits
        self.content_of = content_of
        self.second_order = second_order
        self._blocks: dict[ObjectKey, tuple[DenseBlock, CycleBasis]] = {}  # body -> block, basis
        self._noisy_basis: dict[ObjectKey, CycleBasis] = {}  # body -> basis of the noisy body unitary

    def block(self, items: tuple[NoisyItem, ...], *, with_unitary: bool = True) -> DenseBlock:
        """The :class:`DenseBlock` of ``items`` (see module docstring)."""
        n, d = self.n, 2**self.n
        exact = self.second_order and _coherent(items)
        ut = np.eye(d, dtype=complex) if with_unitary or exact else None  # holds U^T: rows are columns of U
        noisy = np.eye(d, dtype=complex) if exact else None  # the same with the coherent errors
        keys: list[Hashable] = []
        hs = np.zeros((2, 0, d, d), dtype=complex)  # [0]: first-order part, [1]: the rest
        for item in items:
            if gate_kind(item, "generators engine") is Kind.LAYER:
                c = self.content_of(item)
                for g in c.gate_list:
                    hs = conjugate(hs, g, n) if len(keys) else hs
                    if ut is not None:
                        ut = apply(ut, g, n)
                    if noisy is not None:
                        noisy = apply(noisy, g, n)
                if noisy is not None:
                    noisy = noisy_layer(noisy, item, n)
                for hams, generator in c.stages:  # the terms of one stage commute (normal_form.site_stages)
                    new = [(key, sum(embed(h.matrix, h.qubits, n) for h in terms), 0.0) for key, terms in hams.items()]
                    hs = self._join(hs, keys, new, hams, generator)
            else:
                inner, basis = self.repeat(item)
                p = basis.power(item.count)
                hs = p @ hs @ p.conj().T if len(keys) else hs
                if ut is not None:
                    ut = ut @ p.T
                if noisy is not None:
                    body = self._noisy_basis.get(ObjectKey(item.body))
                    noisy = noisy @ (p if body is None else body.power(item.count)).T  # no basis: no error inside
                if not inner.keys:
                    continue
                first = periodic_sum(basis, inner.hamiltonians - inner.second, item.count)
                second = periodic_sum(basis, inner.second, item.count) if np.any(inner.second) else np.zeros_like(first)
                if self.second_order:
                    second = second + cycle_second_order(basis, inner.hamiltonians, item.count)
                hs = self._join(hs, keys, list(zip(inner.keys, first, second)))
        all_orders = False
        if noisy is not None and keys:
            hs, all_orders = _exact_remainder(hs, noisy.T @ ut.conj())
        block = DenseBlock(None if ut is None or not with_unitary else ut.T.copy(), keys, hs.sum(axis=0), hs[1])
        block.all_orders = all_orders
        block.noisy = None if noisy is None else noisy.T.copy()
        return block

    def _join(self, hs: np.ndarray, keys: list, new: list, local: dict | None = None, local_all=()) -> np.ndarray:
        """Add the generators ``new`` ((key, first-order part, second-order part) triples) of an
        item that follows ``hs`` ((2, G, d, d); ``keys`` grows in place). With the second order,
        also -(i/2)[B, A], B = Σ new, A = Σ hs: half of [B, A_g] goes to old group g, half of
        [B_f, A] to new group f (module docstring). ``local``/``local_all``: B per key and in all
        as local operators (cheaper commutators than dense products)."""
        if not new:
            return hs
        n, d = self.n, 2**self.n
        extra_new = [0.0] * len(new)
        if self.second_order and len(keys) and np.any(hs):
            a_total = hs.sum(axis=(0, 1))
            hs = hs.copy()
            if local is not None:
                hs[1] -= 0.25j * local_commutator(local_all, hs.sum(axis=0), n)
                extra_new = [-0.25j * local_commutator(local[key], a_total, n) for key, _, _ in new]
            else:
                b_total = sum(m1 + m2 for _, m1, m2 in new)
                old = hs.sum(axis=0)
                hs[1] -= 0.25j * (b_total @ old - old @ b_total)
                extra_new = [-0.25j * ((m1 + m2) @ a_total - a_total @ (m1 + m2)) for _, m1, m2 in new]
        missing = [k for k, _, _ in new if k not in keys]
        if missing:
            keys.extend(missing)
            hs = np.concatenate([hs, np.zeros((2, len(missing), d, d), dtype=complex)], axis=1)
        for (key, m1, m2), x in zip(new, extra_new):
            i = keys.index(key)
            hs[0, i] += m1
            hs[1, i] += m2 + x
        return hs

    def repeat(self, item: NoisyRepeat) -> tuple[DenseBlock, CycleBasis]:
        """The body's dense block and the Schur basis of its unitary (cached per body: repeats of
        one body with different counts share it)."""
        key = ObjectKey(item.body)
        if key not in self._blocks:
            inner = self.block(item.body)
            self._blocks[key] = (inner, cycle_basis(inner.unitary))
            if inner.noisy is not None:
                self._noisy_basis[key] = cycle_basis(inner.noisy)
        return self._blocks[key]
