"""State metric, incoherent part: first-order cost of every jump operator along the ideal path.

A jump operator L at probability p, applied when the ideal state is ψ_t, lowers the overlap with
the ideal output by p (<L†L> - |<L>|²) to first order (the ideal remainder is unitary and leaves
the overlap unchanged): Kraus K_0 ≈ 1 - p L†L/2, K_1 = sqrt(p) L. For a Pauli L this is
p (1 - <P>²) (design.md §4). Expectations are taken from the reduced density matrix on the
jump's qubits, so a layer costs O(d) per operation.

Repeated blocks: with ψ_k = U_c^k ψ = Σ_c e^{-ikε_c} v_c (:func:`periodic.state_components`),
Σ_k <L†L>_k and Σ_k |<L>_k|² are geometric sums over pair frequencies (periodic.repeated_means and
repeated_squares): exact, cost independent of N, for a block without nested repeats whose input
touches at most MAX_EIGENSPACES distinct quasi-energies (Clifford cycles always qualify). Otherwise
the repetitions are run one by one when N <= EXPLICIT_REPEATS, else SAMPLED_REPEATS evenly spaced
repetitions are run and their mean is scaled by N (an approximation, reported as a warning).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.matrices.apply import apply, as_rows
from budget.engines.generators.dense import ContentOf, DensePropagator
from budget.engines.matrices.periodic import frequency_count, repeated_means, repeated_squares, state_components
from budget.errors.noisy import NoisyItem, NoisyRepeat

EXPLICIT_REPEATS = 64
SAMPLED_REPEATS = 64
MAX_EIGENSPACES = 64
MAX_FREQUENCIES = 1024


def local_gram(x: np.ndarray, qubits: tuple[int, ...], num_qubits: int) -> np.ndarray:
    """g[c, a, c', b] = Σ_r conj(x_c[a, r]) x_c'[b, r] with a, b indices on ``qubits`` (gate order).

    For one vector (m = 1) this is the transposed reduced density matrix: g[0, a, 0, b] = ρ_ba.
    Matrix elements of a local A follow as <x_c|A|x_c'> = Σ_ab g[c, a, c', b] A_ab.
    """
    m, k = x.shape[0], len(qubits)
    t = np.moveaxis(x.reshape((m,) + (2,) * num_qubits), [1 + q for q in qubits], list(range(1, 1 + k)))
    t = t.reshape(m * 2**k, 2 ** (num_qubits - k))
    return (t.conj() @ t.T).reshape(m, 2**k, m, 2**k)


def matrix_elements(gram: np.ndarray, ops: np.ndarray) -> np.ndarray:
    """a[j, c, c'] = <x_c|ops_j|x_c'> from a :func:`local_gram`."""
    m, dq = gram.shape[0], gram.shape[1]
    g2 = gram.transpose(0, 2, 1, 3).reshape(m * m, dq * dq)
    return (as_rows(ops) @ g2.T).reshape(ops.shape[0], m, m)


def _add(acc: dict[str, float], families: Sequence[str], values: np.ndarray, weight: float = 1.0) -> None:
    for f, v in zip(families, values):
        acc[f] = acc.get(f, 0.0) + weight * float(v)


def _flat(items: tuple[NoisyItem, ...]) -> bool:
    return all(gate_kind(it, "generators engine") is Kind.LAYER for it in items)


def repetitions(count: int) -> tuple[list[tuple[int, float]], bool]:
    """(k, weight) pairs that stand for the repetitions k = 0..N-1, and whether they are exact."""
    if count <= EXPLICIT_REPEATS:
        return [(k, 1.0) for k in range(count)], True
    ks = sorted({int((i + 0.5) * count / SAMPLED_REPEATS) for i in range(SAMPLED_REPEATS)})
    return [(k, count / len(ks)) for k in ks], False


class StateJumps:
    """Accumulates p (<L†L> - |<L>|²) per family along the ideal path (see module docstring)."""

    def __init__(self, num_qubits: int, content_of: ContentOf, dense: DensePropagator) -> None:
        self.n = num_qubits
        self.content_of = content_of
        self.dense = dense
        self.approximations: list[str] = []

    def run(self, items: tuple[NoisyItem, ...], psi: np.ndarray) -> tuple[np.ndarray, dict[str, float]]:
        """(ideal state after ``items``, family -> first-order cost) for input state ``psi``."""
        costs: dict[str, float] = {}
        for item in items:
            if gate_kind(item, "generators engine") is Kind.LAYER:
                c = self.content_of(item)
                for g in c.gates:
                    psi = apply(psi, g, self.n)
                for js in c.jumps:
                    g = local_gram(psi[None], js.qubits, self.n).reshape(-1)
                    j = len(js.rates)
                    vals = js.stacked @ g  # <L> for each jump, then <L†L>
                    _add(costs, js.families, js.rates * (vals[j:].real - np.abs(vals[:j]) ** 2))
            else:
                psi = self._repeat(item, psi, costs)
        return psi, costs

    def repeat_curve(self, item: NoisyRepeat, psi: np.ndarray, counts: Sequence[int]) -> list[dict[str, float]] | None:
        """Closed-form costs of ``item``'s body repeated N times for each N, or None when the
        closed form does not apply (nested repeats, too many distinct quasi-energies)."""
        if not _flat(item.body):
            return None
        _, basis = self.dense.repeat(item)
        v, energies = state_components(basis, psi)
        if len(energies) > MAX_EIGENSPACES or frequency_count(energies) > MAX_FREQUENCIES:
            return None
        decay, ops, rates, families = [], [], [], []
        x = v
        for layer in item.body:
            c = self.content_of(layer)
            for g in c.gates:
                x = apply(x, g, self.n)
            for js in c.jumps:
                gram = local_gram(x, js.qubits, self.n)
                decay.append(matrix_elements(gram, js.decay))
                ops.append(matrix_elements(gram, js.operators))
                rates.append(js.rates)
                families += js.families
        out: list[dict[str, float]] = [{} for _ in counts]
        if not families:
            return out
        rates_all = np.concatenate(rates)
        means = repeated_means(np.concatenate(decay), energies, counts).real
        squares = repeated_squares(np.concatenate(ops), energies, counts)
        for i in range(len(counts)):
            _add(out[i], families, rates_all * (means[:, i] - squares[:, i]))
        return out

    def _repeat(self, item: NoisyRepeat, psi: np.ndarray, costs: dict[str, float]) -> np.ndarray:
        _, basis = self.dense.repeat(item)
        closed = self.repeat_curve(item, psi, [item.count])
        if closed is not None:
            for f, v in closed[0].items():
                costs[f] = costs.get(f, 0.0) + v
        else:
            reps, exact = repetitions(item.count)
            for k, w in reps:
                _, c = self.run(item.body, basis.apply_power(k, psi))
                for f, v in c.items():
                    costs[f] = costs.get(f, 0.0) + w * v
            if not exact:
                self.approximations.append(
                    f"the incoherent part of a block repeated {item.count} times was estimated from "
                    f"{len(reps)} evenly spaced repetitions (its input state sees too many distinct "
                    "quasi-energies, or the block holds nested repeats, for the closed form)"
                )
        return basis.apply_power(item.count, psi)
