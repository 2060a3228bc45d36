"""Fold a repeated Clifford block by its period inside a Pauli sweep.

A block whose gates are all Clifford maps Paulis by a signed permutation c of finite order: c^r is
the identity for its period r (signs included; found from the block's tableau, as the clifford
engine does, with stim's Tableau powers). Walking the block r times from the incoming sums S_in,
with snapshots after s = N mod r and after r cycles, gives every quantity of N = q r + s cycles:

    sums (coherent, observable change):  S_N = S_s + q (S_r - S_in)
    observable pulled back exactly:        O_N = c^s(O_in) = O_s
    jump tags made in walked cycle k:      counted q + [r - 1 - k < s] times

(the cycle made j-th from the block's end lands on c^{(N-1-j) mod r}, so residues repeat q or
q + 1 times). Stochastic sums, truncation bounds and generator norms combine the same way as the
sums. Cost: r cycles whatever N is. The observable change is the exception: cycle j adds
c^{(N-1-j) mod r} G c^j(O), which depends on j mod r as well, so that S_N = S_s + q c^s(S_r - S_in);
blocks with observables are folded only when s = 0 and walked cycle by cycle otherwise.
"""

from __future__ import annotations

import numpy as np
import stim

from budget.circuit.walk import Kind, gate_kind
from budget.engines.frame.walk import Walker
from budget.engines.pauli._store import Store
from budget.errors.noisy import NoisyItem, NoisyRepeat

MAX_PERIOD = 4096
"""Largest period searched (tableau products); longer-period blocks are walked cycle by cycle."""


def all_clifford(items: tuple[NoisyItem, ...], book) -> bool:
    for it in items:
        if gate_kind(it, "pauli engine") is Kind.LAYER:
            if not book(it).clifford:
                return False
        elif not all_clifford(it.body, book):
            return False
    return True


def period(n: int, body: tuple[NoisyItem, ...], limit: int = MAX_PERIOD) -> int | None:
    """Smallest r ≤ limit with c^r = identity (signs included), or None."""
    try:
        frame = Walker(n, "pull").run(body)
    except ValueError:  # a gate the Clifford check does not accept
        return None
    if frame is None:
        return None
    one = frame.to_stim()
    ident = stim.Tableau(n)
    power = one
    for r in range(1, limit + 1):
        if power == ident:
            return r
        power = power.then(one)
    return None


def _combine(s_part: Store, r_part: Store, in_part: Store, q: int) -> Store:
    scaled_r = Store(r_part.x, r_part.z, r_part.key, r_part.coef * q)
    scaled_in = Store(in_part.x, in_part.z, in_part.key, in_part.coef * -q)
    return Store.concat([s_part, scaled_r, scaled_in]).merged()


def fold(sweep, rep: NoisyRepeat) -> bool:
    """Fold ``rep`` inside ``sweep`` when it is Clifford with a period below its count; True if done."""
    count = int(rep.count)
    if count < 2 or not all_clifford(rep.body, sweep.book):
        return False
    r = period(sweep.n, rep.body)
    if r is None or r >= count:
        return False
    q, s = divmod(count, r)
    if s and len(sweep.obs):
        return False  # the observable change of cycle j depends on c^j(O): see the module docstring
    start = sweep.snapshot()
    occ0, tag0 = len(sweep.occurrences), sweep.tag_count
    at_s = start if s == 0 else None
    occ_cycle = []
    for k in range(r):
        sweep.run_items(rep.body)
        occ_cycle.append(len(sweep.occurrences))
        if k + 1 == s:
            at_s = sweep.snapshot()
    at_r = sweep.snapshot()
    # tags: those made before the block take their rows from the s snapshot, the walked ones from r
    tags_in_s = at_s.tags.take(at_s.tags.key < tag0)
    tags_walked = at_r.tags.take(at_r.tags.key >= tag0)
    sweep.tags = Store.concat([tags_in_s, tags_walked])
    bounds = ("bound_l2", "bound_l1", "kappa_left")
    for name in bounds:
        setattr(sweep, name, getattr(at_s, name) + q * (getattr(at_r, name) - getattr(start, name)))
    sweep.obs_bound = at_s.obs_bound + q * (at_r.obs_bound - start.obs_bound)
    sweep.coh = _combine(at_s.coh, at_r.coh, start.coh, q)
    sweep.err = _combine(at_s.err, at_r.err, start.err, q)
    sweep.obs = at_s.obs
    sto = {f: at_s.stochastic.get(f, 0.0) + q * (at_r.stochastic.get(f, 0.0) - start.stochastic.get(f, 0.0))
           for f in set(at_r.stochastic) | set(at_s.stochastic)}
    sweep.stochastic = sto
    prev = occ0
    for k in range(r):
        weight = q + (1 if r - 1 - k < s else 0)
        for i in range(prev, occ_cycle[k]):
            site, base, mult = sweep.occurrences[i]
            sweep.occurrences[i] = (site, base, mult * weight)
        prev = occ_cycle[k]
    sweep.note_block(rep, {"mode": "period", "period": r, "cycles_walked": r})
    return True
