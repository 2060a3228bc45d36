"""Where the error lands, per qubit, at the circuit's output: the pauli engine's per-qubit map.

The quantity is the clifford engine's (docs/clifford.md, "where the error lands"): the first-order
marginal process infidelity of each qubit at the output,

    m_q = Σ_Q A_Q² [q ∈ supp Q]  +  Σ_t p_t Σ_Q |l_{t,Q}|² [q ∈ supp Q],

A_Q the summed coherent generator's Pauli coefficients in the output frame (H_out = Σ_t R_t H_t R_t†,
R_t the ideal circuit after layer t) and L_t = R_t P_t R_t† = Σ_Q l_{t,Q} Q each stochastic Pauli
error P_t (rate p_t; relaxation through its Pauli twirl, Tomita & Svore, PRA 90, 062320 (2014))
carried to the output. For a Pauli-diagonal term this is the weight of the reduced channel on q with
the other qubits maximally mixed (the χ-matrix entries of the errors that act on q: Σ_{P: P_q ≠ I}
χ_PP to first order), so on Clifford circuits, where every R_t maps Paulis to Paulis, it is exactly
the clifford engine's map. Unlike the infidelity it depends on the frame, hence the output frame.

One ``push`` walk of the whole circuit (no meeting point): the coherent sum as one column; each
executed stochastic Pauli as its own keyed row of amplitude sqrt(p_t) (rows of different keys never
merge: their squares add). Clifford blocks are folded by their period as in
:mod:`budget.engines.pauli._fold` (a row made in walked cycle k counts q + [r - 1 - k < s] times,
so its amplitude is scaled by the square root); other blocks are walked cycle by cycle. Rows below
the engine's threshold are dropped after each layer (the map is then short by at most the dropped
squares, which are reported); a walk past its row or time limit gives no map and says why.
"""

from __future__ import annotations

import time

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.frame.pauli_frame import unpack_bits
from budget.engines.pauli._fold import all_clifford, period
from budget.engines.pauli._local import local_label
from budget.engines.pauli._plan import PlanBook
from budget.engines.pauli._store import Store, from_local
from budget.engines.pauli._sweep import apply_class
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyLayer, NoisyRepeat
from budget.errors.normal_form import layer_errors, stochastic_rates
from budget.memo import ObjectKey

MAX_ROWS = 2_000_000
"""Rows held at most by the map's walk (beyond: no map, with the reason)."""


class Skipped(RuntimeError):
    """The walk passed its row or time limit (the message says which)."""


def _one_column(nop):
    return [(0, dict(nop.hamiltonian))]


class LandingWalk:
    """The push walk of the module docstring.

    Args:
        n: qubits.
        eps: rows with |amplitude| below it are dropped (0 keeps all).
        deadline: time.monotonic() past which :class:`Skipped` is raised.
    """

    def __init__(self, n: int, eps: float, deadline: float):
        self.n, self.eps, self.deadline = n, eps, deadline
        self.book = PlanBook(n, "push", _one_column, {0: 0}, jumps=False, generators=False)
        self.coh = Store.empty(n, 1)
        self.spots = Store.empty(n, 1)
        self.keys = 0
        self.dropped = 0.0
        self._spot_rows: dict[ObjectKey, tuple] = {}

    def run(self, circuit: NoisyCircuit) -> np.ndarray:
        """m_q for every qubit (see the module docstring)."""
        self._items(circuit.body)
        out = np.zeros(self.n)
        for st in (self.coh.merged(), self.spots.merged()):
            if len(st):
                weight = st.coef[:, 0] ** 2
                out += weight @ unpack_bits(st.x | st.z, self.n).astype(float)
        return out

    def _items(self, items: tuple[NoisyItem, ...]) -> None:
        for it in items:
            if gate_kind(it, "pauli engine") is Kind.LAYER:
                self._layer(it)
            else:
                self._repeat(it)

    def _layer(self, layer: NoisyLayer) -> None:
        if time.monotonic() > self.deadline:
            raise Skipped("the walk passed its time budget")
        plan = self.book(layer)
        for cls in plan.classes:
            self.coh = apply_class(cls, self.coh, self.n)
            self.spots = apply_class(cls, self.spots, self.n)
        qa, qb, v, amp = self._stochastic(layer)
        keys = np.arange(self.keys, self.keys + len(v), dtype=np.int64)
        self.keys += len(v)
        self.coh = self._cut(Store.concat([self.coh, Store(plan.coherent.x, plan.coherent.z, plan.coherent.key,
                                                           plan.coherent.coef.sum(axis=1, keepdims=True))]).merged())
        if len(v):
            self.spots = Store.concat([self.spots, from_local(self.n, qa, qb, v, keys, amp)])
        if not plan.clifford:
            self.spots = self._cut(self.spots.merged())
        if len(self.coh) + len(self.spots) > MAX_ROWS:
            raise Skipped(f"more than {MAX_ROWS:,} Pauli terms")

    def _cut(self, st: Store) -> Store:
        if self.eps <= 0 or not len(st):
            return st
        drop = np.abs(st.coef[:, 0]) < self.eps
        if not drop.any():
            return st
        self.dropped += float(np.sum(st.coef[drop, 0] ** 2))
        return st.take(~drop)

    def _stochastic(self, layer: NoisyLayer) -> tuple:
        """(qa, qb, local Pauli, sqrt(rate)) of every stochastic Pauli of the layer (cached)."""
        hit = self._spot_rows.get(ObjectKey(layer))
        if hit is None:
            qa, qb, v, amp = [], [], [], []
            for errors in layer_errors(layer):  # operations, idle relaxation, context errors
                qs = errors.qubits
                for label, p in stochastic_rates(errors).items():
                    if p > 0 and label.strip("I"):
                        qa.append(qs[0])
                        qb.append(qs[1] if len(qs) == 2 else -1)
                        v.append(local_label(label))
                        amp.append(np.sqrt(p))
            hit = self._spot_rows[ObjectKey(layer)] = (np.array(qa, np.int64), np.array(qb, np.int64),
                                                       np.array(v, np.int64), np.array(amp))
        return hit

    def _repeat(self, rep: NoisyRepeat) -> None:
        count = int(rep.count)
        r = period(self.n, rep.body) if count > 1 and all_clifford(rep.body, self.book) else None
        if r is None or r >= count:
            for _ in range(count):
                self._items(rep.body)
            return
        q, s = divmod(count, r)
        start_coh, first_key = self.coh, self.keys
        at_s = (self.coh, self.spots) if s == 0 else None
        ends = []
        for k in range(r):
            self._items(rep.body)
            ends.append(self.keys)
            if k + 1 == s:
                at_s = (self.coh, self.spots)
        s_coh, s_spots = at_s
        parts = [s_coh, Store(self.coh.x, self.coh.z, self.coh.key, self.coh.coef * q),
                 Store(start_coh.x, start_coh.z, start_coh.key, start_coh.coef * -q)]
        self.coh = Store.concat(parts).merged()
        made = self.spots.take(self.spots.key >= first_key)
        cycle = np.searchsorted(np.array(ends), made.key, side="right")  # walked cycle that made each row
        times = q + (r - 1 - cycle < s)
        made = Store(made.x, made.z, made.key, made.coef * np.sqrt(times)[:, None])
        self.spots = Store.concat([s_spots.take(s_spots.key < first_key), made])
