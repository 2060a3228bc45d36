"""Coherent change of a Pauli observable to second order, from Pauli terms in the input frame.

With the coherent error e^{-iH} (H = Σ_t c_t P_t pulled back to the input frame, first- and
second-order terms of the effective generator included) and ψ = |0…0>, expanding
<ψ|e^{iH} O e^{-iH}|ψ> to second order in H gives

    δ<O> ≈ i<[H, O]> + <H O H> - ½<{H², O}>.

For Pauli terms, P_s O = χ_s O P_s with χ = ±1, so each pair (s, t) contributes
c_s c_t <O P_s P_t> (χ_s - (χ_s χ_t + 1)/2): zero when both commute with O, -2 when both
anticommute, +1 for (commuting s, anticommuting t) and -1 the other way. With A (C) the terms that
anticommute (commute) with O:

    δ<O> ≈ 2i Σ_{t∈A} c_t <P_t O> - 2<O A A> + <O C A> - <O A C>.

On |0…0> a Pauli i^e X^x Z^z has expectation i^e when x = 0, else 0, so a pair counts only when
x_O ⊕ x_s ⊕ x_t = 0: pairs are found by joining the X parts (128-bit GF(2)-linear fingerprints,
:func:`budget.engines.frame.pauli_frame.fingerprints`). The quadratic part is what leads when the
linear one vanishes: an over-rotation about the H axis repeated N times leaves <Z> changed by
-(1 - cos 2a)/2 ≈ -a² (a = N δ/2), with i<[H, Z]> = 0 on |0>.
"""

from __future__ import annotations

import numpy as np

from budget.engines.base import parse_observable
from budget.engines.clifford.allorders import all_orders_observables
from budget.engines.clifford.second import PAIR_BUDGET, SecondOrderSink
from budget.engines.clifford.settings import Settings
from budget.engines.frame.groups import group_rows
from budget.engines.frame.pauli_frame import fingerprints, num_words
from budget.engines.frame.sinks import GroupSink, ObservableSink
from budget.engines.frame.terms import Sources, TermBuilder
from budget.engines.frame.walk import Walker
from budget.errors.light_cone import light_cone_circuit
from budget.errors.noisy import NoisyCircuit
from budget.pauli_algebra import hermitian_sign, label_bits, popcount, row_product

PHASE = np.array([1, 1j, -1, -1j])
PAIR_LIMIT = 5_000_000
"""Largest number of term pairs formed for the quadratic part of one observable."""


def merge_terms(x: np.ndarray, z: np.ndarray, e: np.ndarray, c: np.ndarray) -> tuple:
    """Terms on equal Paulis summed, each written as c' times the Hermitian i^{|x∧z|} X^x Z^z."""
    if not len(c):
        return x, z, e, c
    c = c * hermitian_sign(x, z, e)
    inv, first = group_rows(np.concatenate([x, z], axis=1))
    total = np.bincount(inv, weights=c, minlength=len(first))
    keep = total != 0
    x, z = x[first][keep], z[first][keep]
    e = (popcount(x & z) & 3).astype(np.uint8)
    return x, z, e, total[keep]


def _expect(e: np.ndarray, x: np.ndarray) -> np.ndarray:
    """<0…0| i^e X^x Z^z |0…0>."""
    return np.where(np.any(x != 0, axis=-1), 0.0, PHASE[e.astype(np.int64) & 3])


def _join(left: np.ndarray, right_targets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """All (l, r) with left[l] == right_targets[r] (rows of two uint64 words)."""
    order = np.argsort(left[:, 0], kind="stable")
    k0 = left[order, 0]
    lo = np.searchsorted(k0, right_targets[:, 0], "left")
    hi = np.searchsorted(k0, right_targets[:, 0], "right")
    n = hi - lo
    if n.sum() > PAIR_LIMIT:
        raise OverflowError
    r = np.repeat(np.arange(len(right_targets)), n)
    pos = np.repeat(lo - np.cumsum(n) + n, n) + np.arange(n.sum())
    l_idx = order[pos]
    ok = left[l_idx, 1] == right_targets[r, 1]
    return l_idx[ok], r[ok]


def observable_change(terms: tuple, obs: tuple) -> tuple[float, float | None]:
    """(linear, quadratic) coherent change of one observable (module docstring).

    Args:
        terms: merged terms (x, z, e, c) of H in the input frame (:func:`merge_terms`).
        obs: the observable pulled back to the input frame, one row (x (W,), z (W,), e).
    Returns the quadratic part as None when it would need more than PAIR_LIMIT pairs.
    """
    x, z, e, c = terms
    xo, zo, eo = obs
    if not len(c):
        return 0.0, 0.0
    anti = ((popcount(x & zo[None]) + popcount(z & xo[None])) & 1).astype(bool)
    o_rows = (np.broadcast_to(xo, x.shape), np.broadcast_to(zo, z.shape), np.full(len(c), eo, np.uint8))
    px, pz, pe = row_product((x, z, e), o_rows)  # P_t O
    linear = float(np.real(np.sum(2j * c[anti] * _expect(pe[anti], px[anti]))))
    fx = fingerprints(x, None)
    fo = fingerprints(xo[None], None)[0]
    total = 0.0 + 0.0j
    a_idx, c_idx = np.flatnonzero(anti), np.flatnonzero(~anti)
    try:
        for weight, left, right in ((-2.0, a_idx, a_idx), (1.0, c_idx, a_idx), (-1.0, a_idx, c_idx)):
            if not len(left) or not len(right):
                continue
            s, t = _join(fx[left], fx[right] ^ fo)  # x_s = x_O ⊕ x_t
            s, t = left[s], right[t]
            ox, oz, oe = row_product((np.broadcast_to(xo, (len(s), len(xo))), np.broadcast_to(zo, (len(s), len(zo))), np.full(len(s), eo, np.uint8)), (x[s], z[s], e[s]))
            _, _, pe2 = row_product((ox, oz, oe), (x[t], z[t], e[t]))
            total += weight * np.sum(c[s] * c[t] * PHASE[pe2.astype(np.int64) & 3])
    except OverflowError:
        return linear, None
    return linear, float(total.real)


# --- The engine's observable walks (budget/engines/clifford/engine.py) ---


def observable_errors(
    engine: Settings, circuit: NoisyCircuit, labels: tuple[str, ...], *, prune: bool | None = None, _plans: dict | None = None
) -> dict[str, float]:
    """First-order change of <O> for each Pauli observable (``"Z0Z1"``, ``"X3 Y4"``).

    δ<O> = i<ψ|[H_total, O]|ψ> for the coherent part and -2 p <O> for each stochastic Pauli
    that anticommutes with O. Each observable is walked on its backward light cone unless
    ``prune`` is False; observables whose cone is the whole circuit share one walk.
    """
    prune = engine.prune_observables if prune is None else prune
    parsed = {label: parse_observable(label, circuit.qubits) for label in labels}
    out: dict[str, float] = {}
    whole: list[str] = []
    for label, paulis in parsed.items():
        if prune:
            sub, kept = light_cone_circuit(circuit, set(paulis))
            if len(kept) < circuit.num_qubits:
                index = {q: i for i, q in enumerate(kept)}
                out.update(_observables(engine, sub, {label: {index[q]: p for q, p in paulis.items()}}, {}))
                continue
        whole.append(label)
    if whole:
        out.update(_observables(engine, circuit, {label: parsed[label] for label in whole}, _plans or {}))
    return {label: out[label] for label in labels}


def _observables(engine: Settings, circuit: NoisyCircuit, paulis: dict[str, dict[int, str]], plans: dict) -> dict[str, float]:
    m = circuit.num_qubits
    final = Walker(m, "pull", max_unrolled=engine.max_unrolled, plans=plans).run(circuit.body)
    rows = []
    for letters in paulis.values():
        qs = sorted(letters)
        x, z, e = label_bits("".join(letters[q] for q in qs))
        slots = [q for q, b in zip(qs, x) if b] + [m + q for q, b in zip(qs, z) if b]
        rows.append(final.image(np.array([slots]), np.array([e], np.uint8)))
    xo, zo, eo = (np.concatenate([r[i] for r in rows]) for i in range(3))
    sink = ObservableSink(TermBuilder(m, circuit.qubits, Sources()), xo, zo, eo)
    Walker(m, "pull", sink, max_unrolled=engine.max_unrolled, plans=plans).run(circuit.body)
    totals = sink.totals()
    every = all_orders_observables(engine, circuit, (xo, zo, eo), plans) if engine.second_order else None
    if every is not None:
        return dict(zip(paulis, map(float, totals - sink.coherent_totals() + every)))
    if engine.second_order and sink.terms_seen**2 * num_words(m) <= PAIR_BUDGET:
        coherent = _coherent_observables(engine, circuit, (xo, zo, eo), plans)
        if coherent is not None:
            totals = totals - sink.coherent_totals() + coherent
    return dict(zip(paulis, map(float, totals)))


def _coherent_observables(engine: Settings, circuit: NoisyCircuit, obs: tuple, plans: dict) -> np.ndarray | None:
    """Coherent change of each observable to second order (linear term of H_1 + H_2 and the
    quadratic terms, budget/engines/clifford/observables.py) from the full input-frame terms of
    one more walk (only when the first walk's terms, paired, stay within PAIR_BUDGET); None when that
    walk goes beyond its budgets or folds approximately (the first-order linear term then
    stands alone)."""
    m = circuit.num_qubits
    sink = GroupSink(TermBuilder(m, circuit.qubits, Sources()), key="x")
    outer = SecondOrderSink(sink, "pull", num_words(m))
    Walker(m, "pull", outer, max_unrolled=engine.max_unrolled, plans=plans, orbit_baby=0).run(circuit.body)
    first, second = outer.finish(inject=False)
    if outer.too_costly or outer.unfolded:
        return None
    terms = merge_terms(*(np.concatenate([a[i], b[i]]) for a, b in zip([first], [second]) for i in range(4)))
    out = np.zeros(len(obs[2]))
    for k in range(len(out)):
        linear, quadratic = observable_change(terms, (obs[0][k], obs[1][k], int(obs[2][k])))
        if quadratic is None:
            return None
        out[k] = linear + quadratic
    return out
