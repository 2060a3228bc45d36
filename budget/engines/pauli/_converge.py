"""When a non-Clifford repeated block's contribution has converged, so its remaining cycles need no walk.

A cycle of a repeated block acts on the carried first-order sums as an affine map. Pushing (the
process metric's first half), S_k = C S_{k-1} C† + G − D_k: C the block's ideal unitary, G its
error terms carried to its end, D_k what truncation dropped during cycle k (pulling, C is replaced
by C† and the observable change E by the same rule with the observable O held fixed). If two cycles
in a row drop the same pieces at the same places (D_k = D_{k-1}, compared row by row), the drops
cancel in the difference and the increments Δ_k = S_k − S_{k-1} obey Δ_k = C Δ_{k-1} C†. If
moreover Δ_k = Δ_{k-1} (to rounding), then C Δ_k C† = Δ_k, and every later cycle adds the same Δ:

    S_N = S_k + (N − k) Δ_k,

exactly for the map "walk the cycle, then drop D". Each further dropped D has the norms the bound
already charged for one cycle, so the truncation bound grows by (N − k) times the last cycle's
increment (for observables that is an upper bound, as the norm of the generators still ahead only
shrinks). This happens when the block's error terms (as carried) commute with the block, e.g.
Z-type over-rotations in diagonal blocks (phase ladders, ZZ/Z Trotter parts) or errors the block
maps to themselves; the carried sum then grows linearly and its first-order infidelity as N², the
coherent build-up of design.md §3. Jump-operator tags and the exactly carried observable must
stay unchanged over the cycle (they are transported, not summed), else the block is walked on.

This is the engine's own extrapolation of a verified linear regime (no published method is
claimed); a fixed point (Δ = 0) is its special case. :class:`DropLog` records the drops of a cycle.
"""

from __future__ import annotations

import numpy as np

from budget.engines.pauli._store import Store

ROUNDING = 1e-12
"""Relative tolerance for "the same": coefficients within ROUNDING x the largest one of the sum."""


class Step:
    """What one walked cycle changed: the stores before and after it and the drops made during it,
    as (store name, layer within the cycle, rows or a count). The increments (cleaned of rounding
    residue) are formed only when two cycles have the same :attr:`outline` (the cheap test)."""

    def __init__(self, before_coh: Store, coh: Store, before_err: Store, err: Store, drops: tuple):
        self._pairs = ((coh, before_coh), (err, before_err))
        self.drops = drops
        self.outline = (len(coh) - len(before_coh), len(err) - len(before_err),
                        tuple((name, at, len(what) if isinstance(what, Store) else what) for name, at, what in drops))
        self._increments: tuple[Store, Store] | None = None

    @property
    def increments(self) -> tuple[Store, Store]:
        """(Δ of the coherent sum, Δ of the observable change)."""
        if self._increments is None:
            self._increments = tuple(difference(after, before) for after, before in self._pairs)
        return self._increments

    @property
    def coh(self) -> Store:
        return self.increments[0]

    @property
    def err(self) -> Store:
        return self.increments[1]


def difference(after: Store, before: Store) -> Store:
    """after − before, merged, with rows at rounding level (relative to the larger sum) removed."""
    minus = Store(before.x, before.z, before.key, -before.coef)
    diff = Store.concat([after, minus]).merged()
    if not len(diff):
        return diff
    scale = max(float(np.abs(after.coef).max(initial=0.0)), float(np.abs(before.coef).max(initial=0.0)))
    keep = np.abs(diff.coef).max(axis=1) > ROUNDING * scale
    return diff if keep.all() else diff.take(keep)


def same_rows(a: Store, b: Store) -> bool:
    """Equal row sets (bits and keys, in order after merging) and coefficients to ROUNDING."""
    if len(a) != len(b):
        return False
    if not len(a):
        return True
    a, b = a.merged(), b.merged()
    if len(a) != len(b) or not (np.array_equal(a.key, b.key) and np.array_equal(a.x, b.x) and np.array_equal(a.z, b.z)):
        return False
    scale = max(float(np.abs(a.coef).max()), float(np.abs(b.coef).max()))
    return bool(np.allclose(a.coef, b.coef, rtol=0.0, atol=ROUNDING * scale))


def same_step(a: Step, b: Step) -> bool:
    """Whether two consecutive cycles dropped the same pieces and added the same increments."""
    if a.outline != b.outline:
        return False
    for (name_a, at_a, what_a), (name_b, at_b, what_b) in zip(a.drops, b.drops):
        if name_a != name_b or at_a != at_b:
            return False
        if isinstance(what_a, Store) != isinstance(what_b, Store):
            return False
        if isinstance(what_a, Store) and not same_rows(what_a, what_b):
            return False
        if not isinstance(what_a, Store) and what_a != what_b:
            return False
    return same_rows(a.coh, b.coh) and same_rows(a.err, b.err)


class DropLog:
    """The drops made while one cycle is walked (nested cycles add theirs to the enclosing log)."""

    def __init__(self, start: int, outer: "DropLog | None"):
        self.start, self.outer = start, outer
        self.entries: list[tuple] = []

    def add(self, name: str, layer: int, what) -> None:
        """A drop (rows of store ``name``, or a count of cycles counted without walking) at the
        executed-layer counter ``layer``; kept relative to this cycle's first layer."""
        self.entries.append((name, layer - self.start, what))
        if self.outer is not None:
            self.outer.add(name, layer, what)
