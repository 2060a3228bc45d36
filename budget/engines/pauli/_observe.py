"""Coherent change of Pauli observables beyond the first order, for the pauli engine.

The first-order sweep gives δ<O> = <0|E|0> with E = Σ_t V_t† G_t(O_t) V_t (G_t the layer's
Heisenberg generator); its coherent part is the linear term i<[H_1, Õ]> of the input-frame
generator H_1 and the pulled-back observable Õ = U† O U (a sum of Pauli rows). Where that term
vanishes the change is quadratic in the generator (issue 10). Two ways, best first:

- every order, where the errors' light cones stay within MAX_SUPPORT_QUBITS qubits: the coherent
  error W in the input frame as components (:class:`budget.engines.pauli._allorders.LightCones`),
  and δ<O>_coh = Σ_s o_s (<0|W† P_s W|0> - <0|P_s|0>) over the rows o_s P_s of Õ, each
  expectation a product over the components (:func:`budget.engines.clifford.allorders.pauli_changes`);
  the sweep then carries the incoherent generators only;
- otherwise the second order: with H = H_1 + H_2 (the Magnus/BCH second-order term, Blanes, Casas,
  Oteo & Ros, Phys. Rep. 470, 151 (2009)) in the input frame,
  δ<O>_coh ≈ i<[H, O]> + <H O H> - ½<{H², O}> summed over the rows of Õ
  (:func:`budget.engines.clifford.observables.observable_change`, the clifford engine's pairing),
  which replaces the sweep's linear term i<[H_1, Õ]>. It is formed while the rows of Õ times
  the terms of H stay within PAIR_ROWS; beyond that the first order stands and the engine says so.
"""

from __future__ import annotations

import numpy as np

from budget.engines.clifford.allorders import OutOfReach, pauli_changes
from budget.engines.clifford.observables import merge_terms, observable_change
from budget.engines.clifford.second import TooCostly
from budget.engines.frame.pauli_frame import pack_bits
from budget.engines.pauli._allorders import LightCones
from budget.engines.pauli._plan import PlanBook
from budget.engines.pauli._store import Store, group_equal
from budget.engines.pauli._sweep import Sweep
from budget.errors.noisy import NoisyCircuit
from budget.pauli_algebra import popcount

PAIR_ROWS = 1e6
"""Largest (rows of Õ) x (terms of H) for the second-order observable terms (about a second)."""
MAX_ROWS = 200
"""Rows of Õ paired one by one (a Python loop, a few ms each) for the second-order observable terms at most."""
_FIRST_ONLY = ("observables: the coherent change is the first-order (linear) term only; its quadratic terms "
               "were too many to form, so a change that the first order misses reads as 0")


def _rows(s: Store) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(x, z, e) of Hermitian Pauli rows, e = |x ∧ z| mod 4 (i^e X^x Z^z)."""
    return s.x, s.z, (popcount(s.x & s.z) & 3).astype(np.uint8)


def every_order_reach(circuit: NoisyCircuit) -> LightCones | str:
    """The circuit's coherent error as components, or why it is out of reach."""
    cones = LightCones(circuit.num_qubits)
    try:
        cones.run(circuit.body)
    except OutOfReach as why:
        return str(why)
    return cones


def every_order_changes(cones: LightCones, obs: Store, count: int, n: int) -> np.ndarray:
    """Coherent change of each observable to every order (module docstring). A row with an X or Y
    outside the components changes by 0 (<0|·|0> vanishes before and after); the others depend only
    on their letters on the components' qubits, so each distinct restriction is read once."""
    comps = cones.components()
    mask = pack_bits([q for qubits, _ in comps for q in qubits], n)
    inside = ~np.any(obs.x & ~mask, axis=1)
    rows = obs.take(inside)
    if not len(rows):
        return np.zeros(count)
    inv, first = group_equal(np.concatenate([rows.x & mask, rows.z & mask], axis=1))
    per_group = pauli_changes(comps, _rows(Store(rows.x[first] & mask, rows.z[first] & mask, rows.key[first], rows.coef[first])), n)
    return np.bincount(rows.key, weights=rows.coef[:, 0] * per_group[inv], minlength=count)


def second_order_terms(h: Store, obs: Store, count: int) -> tuple[np.ndarray, np.ndarray] | None:
    """(linear, quadratic) coherent change of each observable for the input-frame generator ``h``
    (module docstring); None when too costly."""
    terms = merge_terms(*_rows(h), h.total())
    if len(obs) * max(len(terms[3]), 1) > PAIR_ROWS:
        return None
    x, z, e = _rows(obs)
    linear, quadratic = np.zeros(count), np.zeros(count)
    for s in range(len(obs)):
        lin, quad = observable_change(terms, (x[s], z[s], int(e[s])))
        if quad is None:
            return None
        linear[obs.key[s]] += obs.coef[s, 0] * lin
        quadratic[obs.key[s]] += obs.coef[s, 0] * quad
    return linear, quadratic


def beyond_first(circuit: NoisyCircuit, cones: LightCones | str | None, obs: Store, first: np.ndarray, eps: float,
                 deadline: float | None, h_rows: int) -> tuple[np.ndarray, str | None]:
    """Observable changes with the coherent part beyond the first order (module docstring): to
    every order where ``cones`` holds the components (``first`` then holds the incoherent part
    only), else with the second-order terms; with the note when only the first order stands.
    ``obs``: the observables pulled back to the input frame, keyed by observable; ``h_rows``: the
    rows of the first-order coherent sum (the size of H that the pairing would meet)."""
    if isinstance(cones, LightCones):
        return first + every_order_changes(cones, obs, len(first), circuit.num_qubits), None
    if len(obs) > MAX_ROWS or len(obs) * max(h_rows, 1) > PAIR_ROWS:
        return first, _FIRST_ONLY
    try:
        sweep = _pull_coherent(circuit, eps, deadline, second=True)
        h1, h12 = sweep.coh, Store.concat([sweep.coh, sweep.second.sum]).merged()
    except TooCostly:
        h1 = h12 = _pull_coherent(circuit, eps, deadline, second=False).coh
    with_second = second_order_terms(h12, obs, len(first))
    only_first = with_second if h12 is h1 else second_order_terms(h1, obs, len(first))
    if with_second is None or only_first is None:
        return first, _FIRST_ONLY
    return first - only_first[0] + with_second[0] + with_second[1], None


def _pull_coherent(circuit: NoisyCircuit, eps: float, deadline: float | None, *, second: bool) -> Sweep:
    """A pull sweep of the coherent generator (H_1 in the input frame; with H_2 when ``second``)."""
    n = circuit.num_qubits
    book = PlanBook(n, "pull", lambda nop: [("all", nop.hamiltonian)], {"all": 0}, jumps=False, generators=False)
    sweep = Sweep(n, book, eps, scale=np.ones(1), deadline=deadline, second=second)
    sweep.run(circuit.body)
    return sweep
