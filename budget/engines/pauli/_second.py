"""Second-order (commutator) term of the effective generator, carried along a Pauli sweep.

The errors of a circuit in one frame are e^{-iG_M} ⋯ e^{-iG_1}; to second order in the error
angles their product is e^{-i(H_1 + H_2)} with H_1 = Σ_k G_k and H_2 = -(i/2) Σ_{j<k} [G_k, G_j]
(Magnus expansion / BCH formula: Blanes, Casas, Oteo & Ros, Phys. Rep. 470, 151 (2009); average
Hamiltonian theory: Haeberlen & Waugh, Phys. Rev. 175, 453 (1968)). Both sums are built in one
walk: when a layer's terms G join the carried sum S (in the walk's frame), H_2 gains
-(i/2)[G, S] (``push``: G is later in time than S) or -(i/2)[S, G] (``pull``: earlier), then both
H_1 and H_2 are conjugated by the next gates like any carried sum (conjugation is an automorphism,
so commutators may be taken in any frame). Terms of one layer commute (disjoint operations, or one
operation's single exponential) and form no pair.

Echoed blocks, whose first order cancels cycle by cycle, keep the N² growth of their second-order
term this way (issue 10). The commutator of Pauli terms is formed by
:func:`budget.engines.clifford.second.commutator_terms` (shared with the clifford engine); each
term is split between the two sources of its pair, so family shares still add up.
"""

from __future__ import annotations

import numpy as np

from budget.engines.clifford.second import PAIR_BUDGET, TooCostly, commutator_terms
from budget.engines.frame.pauli_frame import hermitian_sign, popcount
from budget.engines.pauli._store import Store


def _rows(s: Store) -> tuple:
    """(x, z, e, c, tag) rows, one per non-zero (row, column), i^e X^x Z^z Hermitian, tag = column."""
    r, k = np.nonzero(s.coef)
    x, z = s.x[r], s.z[r]
    return x, z, (popcount(x & z) & 3).astype(np.uint8), s.coef[r, k], k.astype(np.int64)


class SecondOrder:
    """H_2 of one sweep (see module docstring).

    Args:
        n, columns: qubits and columns of the sweep's coherent store.
        later_first: True when the walk meets terms in time order (``push``).
    """

    def __init__(self, n: int, columns: int, *, later_first: bool):
        self.sum = Store.empty(n, columns)
        self.later_first = later_first
        self.columns = columns
        self.pairs = 0.0

    def add(self, new: Store, carried: Store) -> None:
        """H_2 += -(i/2)[later, earlier] for the new terms against the carried sum."""
        if not len(new) or not len(carried):
            return
        self.pairs += float(len(new)) * len(carried) * new.x.shape[1]
        if self.pairs > PAIR_BUDGET:
            raise TooCostly(self.pairs)
        a, b = _rows(new), _rows(carried)
        later, earlier = (a, b) if self.later_first else (b, a)
        x, z, e, c, tag = commutator_terms(later, earlier)
        if not len(c):
            return
        coef = np.zeros((len(c), self.columns))
        coef[np.arange(len(c)), tag] = c * hermitian_sign(x, z, e)
        self.sum = Store.concat([self.sum, Store(x, z, np.zeros(len(c), np.int64), coef).merged()])
