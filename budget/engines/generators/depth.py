"""Infidelity versus depth: a whole circuit used as a cycle and repeated N times, for many N at once.

The circuit's body is propagated once (dense generator H_c and ideal unitary U_c of one cycle,
first-order content of every layer); each N then costs O(d³) through the periodic closed form
(:mod:`budget.engines.matrices.periodic`), with no re-simulation:

- coherent: exponentiated infidelity of the exact generator of N cycles, from the Schur bases of
  the ideal and the noisy cycle unitary (as the generators engine's dense blocks,
  :mod:`budget.engines.generators.dense`); where its principal branch is not safe, S_N(H_c) + C_N(H_c, H_c)
  (the per-cycle generator summed over the cycles with the second-order commutators between
  them, :func:`budget.engines.matrices.periodic.cross_cycle_sum`); first order from the first-order part;
- stochastic, process metric: N times the per-cycle first-order sum;
- stochastic, state metric: Σ_k over cycles of the jump costs p (<L†L> - |<L>|²), by the geometric
  sums over the cycle's quasi-energies (exact when the closed form applies, else evaluated per N
  with sampled repetitions as in :mod:`budget.engines.generators.jumps`).

The same numbers as ``GeneratorsEngine().run(circuit.with_cycles(N))`` would give, for every N in
one call; :func:`budget.engines.matrices.periodic.accumulation_split` says which part of the cycle's error
builds up (∝ N) and which is echoed away.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from budget.engines.matrices.channels import content_cache
from budget.engines.generators.dense import MAX_DENSE_QUBITS, DensePropagator
from budget.engines.generators.jumps import StateJumps
from budget.engines.base import Metric
from budget.engines.matrices.periodic import AccumulationSplit, accumulation_split, coherent_curve, cycle_basis, exact_coherent_curve
from budget.errors.noisy import NoisyCircuit, NoisyRepeat
from budget.problems import TooLargeError

RangeNote = Callable[[float, float], "str | None"]
"""(stochastic, coherent) -> None while the value is within the engine's range, else the reason."""


@dataclass(frozen=True)
class SweepValues:
    """The generators engine's values for the circuit repeated N times, one entry per N.

    Attributes:
        counts: the N values.
        infidelity: exponentiated coherent + first-order stochastic, clipped to [0, 1].
        first_order: first-order coherent + first-order stochastic.
        coherent: exponentiated coherent part.
        stochastic: first-order stochastic part.
        split: growing and bounded size of the per-cycle Hamiltonian error (radians).
        approximated: True when the state-metric stochastic part used sampled repetitions.
        in_range: per N, whether the value is within the engine's range (no range rule: all True).
    """

    counts: tuple[int, ...]
    infidelity: np.ndarray
    first_order: np.ndarray
    coherent: np.ndarray
    stochastic: np.ndarray
    split: AccumulationSplit
    approximated: bool = False
    in_range: tuple[bool, ...] = ()


class RepeatSweep:
    """One cycle propagated once; :meth:`values` then gives any repetition counts at O(d³) each.

    ``range_note``: the engine's range rule (budget/engines/generators/engine.py), applied to each
    N's stochastic and coherent parts.
    """

    def __init__(self, circuit: NoisyCircuit, metric: Metric, range_note: RangeNote | None = None) -> None:
        n = circuit.num_qubits
        if n > MAX_DENSE_QUBITS:
            raise TooLargeError(f"{circuit.source}: depth curve: dense matrices, limit {MAX_DENSE_QUBITS} qubits")
        self.circuit, self.metric, self._range_note = circuit, metric, range_note
        self._content_of = content_cache(n)
        self._dense = DensePropagator(n, self._content_of, second_order=True)
        self._cycle = NoisyRepeat(circuit.body, 1)
        inner, self._basis = self._dense.repeat(self._cycle)
        self._h = inner.total()
        self._h_first = self._h - inner.second_total()
        self._noisy_basis = None if inner.noisy is None else cycle_basis(inner.noisy)  # None: no coherent error
        self._psi0 = np.zeros(2**n, dtype=complex)
        self._psi0[0] = 1.0
        self._per_cycle = sum(mult * sum(self._content_of(layer).process_stochastic.values())
                              for layer, mult in circuit.multiplicities())
        self._jumps = StateJumps(n, self._content_of, self._dense) if metric == "state" else None

    def values(self, counts: Sequence[int]) -> SweepValues:
        """The values at every N of ``counts`` (see :class:`SweepValues`)."""
        counts = tuple(int(c) for c in counts)
        state = None if self.metric == "process" else self._psi0
        coh = coherent_curve(self._basis, self._h, counts, state=state, second_order=True)
        exact = ([None] * len(counts) if self._noisy_basis is None
                 else exact_coherent_curve(self._basis, self._noisy_basis, counts, state=state))
        coherent = np.array([c if e is None else e for c, e in zip(coh.infidelity, exact)])
        first = coherent_curve(self._basis, self._h_first, counts, state=state).first_order
        approximated = False
        if self.metric == "process":
            stoch = np.array([c * self._per_cycle for c in counts], dtype=float)
        else:
            closed = self._jumps.repeat_curve(self._cycle, self._psi0, counts)
            if closed is None:
                closed = [self._jumps.run((NoisyRepeat(self.circuit.body, c),), self._psi0)[1] for c in counts]
                approximated = bool(self._jumps.approximations)
            stoch = np.array([sum(c.values()) for c in closed], dtype=float)
        rule = self._range_note
        in_range = tuple(rule is None or rule(float(s), float(c)) is None for s, c in zip(stoch, coherent))
        return SweepValues(
            counts=counts,
            infidelity=np.clip(coherent + stoch, 0.0, 1.0),
            first_order=first + stoch,
            coherent=coherent,
            stochastic=stoch,
            split=accumulation_split(self._basis, self._h),
            approximated=approximated,
            in_range=in_range,
        )

    def at(self, count: int) -> tuple[float, bool]:
        """The value for ``count`` cycles and whether it is within the engine's range."""
        v = self.values((count,))
        return float(v.infidelity[0]), v.in_range[0]


def depth_curve(circuit: NoisyCircuit, metric: Metric, counts: Sequence[int]) -> SweepValues:
    """The generators engine's infidelity of ``circuit`` repeated N times, for each N in ``counts``
    (:meth:`budget.engines.generators.engine.GeneratorsEngine.repeat_sweep` checks the engine's
    reach first).

    >>> from budget.circuit.ir import Operation
    >>> from budget.errors.noisy import NoisyLayer, NoisyOperation
    >>> x = NoisyOperation(Operation("x", (0,)), "x", np.eye(2), {"X": 0.005})
    >>> c = NoisyCircuit(("q",), (NoisyLayer((x,), (), 0.0),))
    >>> [round(float(v), 10) for v in depth_curve(c, "process", [1, 100]).infidelity]
    [2.49998e-05, 0.2298488471]
    """
    return RepeatSweep(circuit, metric).values(counts)
