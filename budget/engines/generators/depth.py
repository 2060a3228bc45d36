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
from typing import Sequence

import numpy as np

from budget.engines.matrices.channels import content_cache
from budget.engines.generators.dense import DensePropagator
from budget.engines.generators.jumps import StateJumps
from budget.engines.base import Metric
from budget.engines.matrices.periodic import AccumulationSplit, accumulation_split, coherent_curve, cycle_basis, exact_coherent_curve
from budget.errors.noisy import NoisyCircuit, NoisyRepeat
from budget.problems import TooLargeError


@dataclass(frozen=True)
class DepthCurve:
    """Infidelity of the circuit repeated N times, one entry per N.

    Attributes:
        counts: the N values.
        infidelity: exponentiated coherent + first-order stochastic, clipped to [0, 1].
        first_order: first-order coherent + first-order stochastic.
        coherent: exponentiated coherent part.
        stochastic: first-order stochastic part.
        split: growing and bounded size of the per-cycle Hamiltonian error (radians).
        approximated: True when the state-metric stochastic part used sampled repetitions.
    """

    counts: tuple[int, ...]
    infidelity: np.ndarray
    first_order: np.ndarray
    coherent: np.ndarray
    stochastic: np.ndarray
    split: AccumulationSplit
    approximated: bool = False


def depth_curve(circuit: NoisyCircuit, metric: Metric, counts: Sequence[int]) -> DepthCurve:
    """The generators engine's infidelity of ``circuit`` repeated N times, for each N in ``counts``.

    >>> from budget.circuit.ir import Operation
    >>> from budget.errors.noisy import NoisyLayer, NoisyOperation
    >>> x = NoisyOperation(Operation("x", (0,)), "x", np.eye(2), {"X": 0.005})
    >>> c = NoisyCircuit(("q",), (NoisyLayer((x,), (), 0.0),))
    >>> [round(float(v), 10) for v in depth_curve(c, "process", [1, 100]).infidelity]
    [2.49998e-05, 0.2298488471]
    """
    from budget.engines.generators.engine import GeneratorsEngine

    reason = GeneratorsEngine().fits(NoisyCircuit(circuit.qubits, (NoisyRepeat(circuit.body, 2),)), metric)
    if reason is not None:
        raise TooLargeError(f"{circuit.source}: depth curve with the generators engine: {reason}")
    n = circuit.num_qubits
    content_of = content_cache(n)
    dense = DensePropagator(n, content_of, second_order=True)
    cycle = NoisyRepeat(circuit.body, 1)
    inner, basis = dense.repeat(cycle)
    h = inner.total()
    psi0 = np.zeros(2**n, dtype=complex)
    psi0[0] = 1.0
    counts = tuple(int(c) for c in counts)
    state = None if metric == "process" else psi0
    coh = coherent_curve(basis, h, counts, state=state, second_order=True)
    exact = exact_coherent_curve(basis, cycle_basis(inner.noisy), counts, state=state)
    coherent = np.array([c if e is None else e for c, e in zip(coh.infidelity, exact)])
    first = coherent_curve(basis, h - inner.second_total(), counts, state=state).first_order
    approximated = False
    if metric == "process":
        per_cycle = sum(mult * sum(content_of(layer).process_stochastic.values()) for layer, mult in circuit.multiplicities())
        stoch = np.array([c * per_cycle for c in counts], dtype=float)
    else:
        jumps = StateJumps(n, content_of, dense)
        closed = jumps.repeat_curve(cycle, psi0, counts)
        if closed is None:
            closed = [jumps.run((NoisyRepeat(circuit.body, c),), psi0)[1] for c in counts]
            approximated = bool(jumps.approximations)
        stoch = np.array([sum(c.values()) for c in closed], dtype=float)
    return DepthCurve(
        counts=counts,
        infidelity=np.clip(coherent + stoch, 0.0, 1.0),
        first_order=first + stoch,
        coherent=coherent,
        stochastic=stoch,
        split=accumulation_split(basis, h),
        approximated=approximated,
    )
