"""Second-order (commutator) terms of the clifford engine, as Pauli terms in the walk's frame.

The errors of a circuit, pushed to a common frame, are e^{-iG_M} ⋯ e^{-iG_1} (G_k after G_j for
k > j); to second order in the error angles their product is e^{-i(H_1 + H_2)} with

    H_1 = Σ_k G_k,    H_2 = -(i/2) Σ_{j<k} [G_k, G_j]

(Magnus expansion / BCH formula: Blanes, Casas, Oteo & Ros, Phys. Rep. 470, 151 (2009); average
Hamiltonian theory: Haeberlen & Waugh, Phys. Rev. 175, 453 (1968)). For Pauli terms G = c P,
G' = c' P' the commutator is a Pauli term again: [P', P] = 2 P'P when they anticommute, else 0,
so -(i/2)[c'P', cP] = c c' Q with Q = -i P'P a Hermitian Pauli (phase exponent of P'P minus 1).
Conjugation by the frame is an automorphism, so commutators can be taken in the frame where the
walk lands its terms (output frame for ``"push"``, input frame for ``"pull"``) and join H_1 there.

Folded blocks. A block of period r repeated N = q r + s times: the terms of walked repetition k
stand for w_k = q + [k < s] copies at repetitions k, k + r, .... Counting, for two terms u before
v in one period, the ordered pairs of their copies minus the reversed ones gives the weight
ω = q + 1 when both lie in the first s repetitions, q when both lie in the others, and 0 when u
lies in the first s and v after them. So one walked period gives the block's whole second order,
whatever N is; the block then stands as one item (its terms times w_k) for the pairs with what
lies outside it. Terms of one stage of a layer commute (disjoint operations, one operation's single
exponential, or context errors that commute: :func:`budget.errors.normal_form.site_stages`), so
only pairs of different stages count; each stage is its own item, in time order.

Cost: for each layer, its terms against the earlier terms of its level (one AND and popcount per
64 qubits per pair); the engine runs this pass only when it is affordable (PAIR_BUDGET).
"""

from __future__ import annotations

import numpy as np

from budget.engines.frame.groups import group_rows
from budget.engines.frame.pauli_frame import Frame, fingerprints
from budget.engines.frame.sinks import GroupSink
from budget.errors.noisy import NoisyLayer
from budget.pauli_algebra import hermitian_sign, popcount, row_product

PAIR_BUDGET = 3e8
"""Largest number of (pair x word) operations spent on second-order terms in one run."""


CHUNK = 2_000_000
"""Largest (new terms x earlier terms x words) array formed at once."""


ROW_BUDGET = 2e7
"""Largest number of (term x word) kept as full Pauli rows in one pass."""


class TooCostly(Exception):
    """A second-order pass went beyond PAIR_BUDGET or ROW_BUDGET."""


def _empty(w: int) -> tuple:
    z = np.zeros((0, w), np.uint64)
    return z, z.copy(), np.zeros(0, np.uint8), np.zeros(0), np.zeros(0, np.int64)


def _cat(parts: list[tuple], w: int) -> tuple:
    if not parts:
        return _empty(w)
    return tuple(np.concatenate([p[i] for p in parts]) for i in range(5))


class SecondOrderSink:
    """Wraps a :class:`GroupSink`: forwards every call and keeps the full images of the coherent
    terms of each emitted layer, to form the second-order terms (module docstring).

    Args:
        sink: the GroupSink of this pass (process ``"xz"`` or state ``"x"`` keys).
        direction: the walker's direction (``"push"`` walks backwards in time).
        words: 64-bit words per Pauli row.
    """

    def __init__(self, sink: GroupSink, direction: str, words: int):
        self.sink = sink
        self.sign = -1.0 if direction == "push" else 1.0  # walk order against time order
        self.w = words
        self.items: list[tuple[int, str, tuple]] = []  # (batch, "term" | "second", rows)
        self.cost = 0.0
        self.rows = 0.0
        self.unfolded = False
        self.too_costly = False  # pairs or rows beyond the budgets: the pass is incomplete

    # -- the sink protocol (forwarded) ----------------------------------------------------------
    def mark(self) -> int:
        return self.sink.mark()

    def scale(self, start: int, stop: int, amplitude: float, probability: float) -> None:
        self.sink.scale(start, stop, amplitude, probability)

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        b = self.sink.mark()
        self.sink.emit(layer, frame)
        if self.too_costly:
            return
        stages = self.sink.explicit_stages(layer, frame)
        for got in (stages if self.sign > 0 else stages[::-1]):  # walk order
            self.rows += len(got[3]) * self.w
            if self.rows > ROW_BUDGET:
                self.too_costly = True
                self.items.clear()
                return
            self.items.append((b, "term", got))

    # -- folding hooks (called by the walker) ---------------------------------------------------
    def fold(self, marks: list[int], count: int) -> None:
        if self.too_costly:
            return
        self._fold(marks, count)

    def _fold(self, marks: list[int], count: int) -> None:
        """A block walked over one period (batches marks[k]..marks[k+1] are repetition k) stands
        for ``count`` repetitions: form its second-order terms with the weights ω and replace its
        items by one item (terms times w_k) plus its second-order terms (also times w_k)."""
        period = len(marks) - 1
        q, s = divmod(count, period)
        start = next((i for i, it in enumerate(self.items) if it[0] >= marks[0]), len(self.items))
        block = self.items[start:]
        del self.items[start:]
        rep = lambda b: int(np.searchsorted(marks, b, side="right") - 1)  # noqa: E731
        weight = lambda k: float(q + (1 if k < s else 0))  # noqa: E731
        early: list[tuple] = []  # terms of repetitions k < s, each copy once
        late: list[tuple] = []  # terms of repetitions k >= s
        terms, seconds = [], []
        for b, kind, rows in block:
            k = rep(b)
            w = weight(k)
            if kind == "second":
                seconds.append(_scaled(rows, w))
                continue
            if k < s:
                seconds.append(self._pairs(rows, _cat(early, self.w), q + 1.0))
                early.append(rows)
            else:
                seconds.append(self._pairs(rows, _cat(late, self.w), float(q)))
                late.append(rows)
            terms.append(_scaled(rows, w))
        self.items.append((marks[0], "term", _cat(terms, self.w)))
        self.items.append((marks[0], "second", _merge(_cat(seconds, self.w))))

    def approximate(self) -> None:
        """A block folded without a period: its second order is not formed exactly."""
        self.unfolded = True

    # -- the pairs --------------------------------------------------------------------------------
    def _pairs(self, new: tuple, earlier: tuple, weight: float) -> tuple:
        """Second-order terms of ``new`` (walked after ``earlier``) with every earlier term,
        times ``weight``, each split in two halves tagged with the two terms' sources."""
        xv, zv, ev, cv, tv = new
        xe, ze, ee, ce, te = earlier
        if not len(cv) or not len(ce) or weight == 0.0 or self.too_costly:
            return _empty(self.w)
        self.cost += len(cv) * len(ce) * self.w
        if self.cost > PAIR_BUDGET:
            self.too_costly = True
            self.items.clear()
            return _empty(self.w)
        # H_2 ∋ -(i/2)[G_later, G_earlier]; the walk visits v after u, in time order or against it
        return commutator_terms(new, earlier, self.sign * weight)

    def finish(self, *, inject: bool = True) -> tuple[tuple, tuple]:
        """Pairs of the remaining top-level items (weight 1); with ``inject``, every second-order
        term goes into the GroupSink as one more batch. Returns the full rows (x, z, e, coef,
        tag) of the first-order terms (fold weights applied) and of the second-order terms."""
        earlier: list[tuple] = []
        seconds = []
        for _, kind, rows in self.items:
            if kind == "second":
                seconds.append(rows)
                continue
            seconds.append(self._pairs(rows, _cat(earlier, self.w), 1.0))
            earlier.append(rows)
            if len(seconds) > 64:
                seconds = [_merge(_cat(seconds, self.w))]
        second = _merge(_cat(seconds, self.w))
        if inject and len(second[3]) and not self.too_costly:
            b = self.sink._new()
            keys = fingerprints(second[0], second[1] if self.sink.key == "xz" else None)
            self.sink.chunks.append((b, keys, second[3], second[2], second[4]))
        return _cat(earlier, self.w), second


def _merge(rows: tuple) -> tuple:
    """Terms on equal Paulis with equal tags summed (coefficients of the Hermitian
    i^{|x∧z|} X^x Z^z), so that second-order terms stay as many as their distinct Paulis."""
    x, z, e, c, t = rows
    if len(c) < 2:
        return rows
    c = c * hermitian_sign(x, z, e)
    inv, first = group_rows(np.concatenate([x, z, t[:, None].astype(np.uint64)], axis=1))
    total = np.bincount(inv, weights=c, minlength=len(first))
    keep = total != 0
    x, z, t = x[first][keep], z[first][keep], t[first][keep]
    return x, z, (popcount(x & z) & 3).astype(np.uint8), total[keep], t


def commutator_terms(later: tuple, earlier: tuple, weight: float = 1.0) -> tuple:
    """weight · (-(i/2)) Σ_{v∈later, u∈earlier} [G_v, G_u] as Pauli terms (x, z, e, c, tag), for
    Pauli terms G = c i^e X^x Z^z given as rows (x (T, W), z (T, W), e (T,), c (T,), tag (T,)).

    Each anticommuting pair gives c_u c_v (-i P_v P_u), a Hermitian Pauli term, split into two
    halves tagged with the two terms' tags (so per-source shares add up). Public for any Pauli
    engine (the clifford engine, a sparse Pauli propagation engine) that holds its terms as rows.
    """
    xv, zv, ev, cv, tv = later
    xe, ze, ee, ce, te = earlier
    w = xv.shape[1] if xv.ndim == 2 else 1
    if not len(cv) or not len(ce) or weight == 0.0:
        return _empty(w)
    step = max(1, CHUNK // max(1, len(cv) * w))
    found = []
    for a in range(0, len(ce), step):  # chunks keep the (later x earlier x words) array small
        anti = (popcount(xv[:, None] & ze[None, a : a + step]) + popcount(zv[:, None] & xe[None, a : a + step])) & 1
        ii, jj = np.nonzero(anti)
        found.append((ii, jj + a))
    i = np.concatenate([f[0] for f in found])
    j = np.concatenate([f[1] for f in found])
    if not len(i):
        return _empty(w)
    x, z, e = row_product((xv[i], zv[i], ev[i]), (xe[j], ze[j], ee[j]))  # P_v P_u, anti-Hermitian
    e = ((e.astype(np.int64) - 1) & 3).astype(np.uint8)  # -i P_v P_u, Hermitian
    c = weight * cv[i] * ce[j] / 2
    cat = np.concatenate
    return cat([x, x]), cat([z, z]), cat([e, e]), cat([c, c]), cat([tv[i], te[j]])


def _scaled(rows: tuple, w: float) -> tuple:
    x, z, e, c, t = rows
    return x, z, e, c * w, t


def repetition_second_order(parts: list[tuple], direction: str, words: int) -> tuple | str:
    """H_2 of one repetition of a block, -(i/2) Σ_{j<k} [G_k, G_j] over its layers, as merged
    Pauli rows (x, z, e, coef, tag), from the explicit terms of each layer in walk order
    (``direction`` ``"push"`` walks backwards in time). For blocks folded by orbits
    (budget/engines/frame/walk.py ``cycle_terms``): these terms recur in every repetition and are
    folded with the first-order ones. A string (the reason) when the pairs exceed PAIR_BUDGET."""
    sign = -1.0 if direction == "push" else 1.0
    sizes = [len(p[3]) for p in parts]
    if sum(sizes) ** 2 * words > PAIR_BUDGET:
        return f"second order within a repetition of a block folded by orbits: more than {PAIR_BUDGET:.0e} pair operations, left out"
    earlier: list[tuple] = []
    seconds = []
    for rows in parts:
        seconds.append(commutator_terms(rows, _cat(earlier, words), sign))
        earlier.append(rows)
    return _merge(_cat(seconds, words))
