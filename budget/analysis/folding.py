"""Detector budgets of a long repeated block without unrolling it (Pauli-frame path).

A block repeated N times with the same noise every iteration reaches a steady state after the
first iterations: its detectors repeat with a fixed shift of the record, and to first order every
error mechanism flips detectors of its own iteration and the next. So the circuit is analysed with
the block repeated only KEEP = 5 times (and KEEP + 1 for the rate of growth): detectors closing in
iterations 0-1 and 3-4 (the boundaries) keep their probabilities, those closing in iteration 2 stand
for every middle iteration and are repeated N - KEEP + 1 times with their record indices and round
shifted, and P(some detector fires) follows log(1 - P(N)) = log(1 - P(KEEP)) + (N - KEEP)·Δ with Δ
the change from KEEP to KEEP + 1 (each middle iteration adds the same independent mechanisms, so
this is exact at the level of the frame model). Cost independent of N apart from listing the
detectors.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

from budget.analysis.detectors import Checks, infer_checks
from budget.analysis.result import DetectorBudget
from budget.circuit.walk import Kind, kind_of
from budget.engines.clifford.frames import FrameResult, frames
from budget.engines.clifford.stim_circuit import record_qubits
from budget.errors.noisy import NoisyCircuit, NoisyRepeat

FOLD_AT = 64
"""A top-level repeat with more iterations than this is folded on the frame path."""
KEEP = 5


@dataclass(frozen=True)
class Folded:
    """Detector budget of the whole circuit, from the circuit with the block run KEEP times."""

    detectors: tuple[DetectorBudget, ...]
    logical: tuple[tuple[int, ...], ...]
    any_fires: float
    any_families: dict[str, float]
    num_measurements: int
    random_rank: int
    small: NoisyCircuit
    small_checks: Checks
    twirled_any_fires: float
    """P(some detector fires) with every error twirled, folded the same way."""
    steady: bool
    """The detectors after the block have the same probabilities after KEEP and KEEP + 1
    iterations. False when a coherent error that no check sees builds up over the iterations: the
    fold would then miss its growth (unroll instead)."""
    coherent_twirled: bool
    """Coherent errors had to be twirled (deferred register too large)."""


def fold_target(noisy: NoisyCircuit) -> int | None:
    """Index of the top-level repeat to fold (the one with most iterations, above FOLD_AT)."""
    best = None
    for i, it in enumerate(noisy.body):
        if kind_of(it, "fold_target") is Kind.REPEAT and it.count > FOLD_AT and (best is None or it.count > noisy.body[best].count):
            best = i
    return best


def with_count(noisy: NoisyCircuit, index: int, count: int) -> NoisyCircuit:
    body = list(noisy.body)
    body[index] = NoisyRepeat(body[index].body, count)
    return dataclasses.replace(noisy, body=tuple(body))


def folded_frames(noisy: NoisyCircuit, index: int) -> Folded:
    """See the module docstring (coherent errors by amplitude classes, :func:`frames`)."""
    rep = noisy.body[index]
    n = rep.count
    small, big = with_count(noisy, index, KEEP), with_count(noisy, index, KEEP + 1)
    cs, cb = infer_checks(small), infer_checks(big)
    small_dets, big_dets = tuple(d.measurements for d in cs.detectors), tuple(d.measurements for d in cb.detectors)
    fs: FrameResult = frames(small, small_dets, coherent=True)
    fb: FrameResult = frames(big, big_dets, coherent=True)
    ts = frames(small, small_dets, shares=False).log_none_fires
    tb = frames(big, big_dets, shares=False).log_none_fires
    before = len(record_qubits(dataclasses.replace(noisy, body=noisy.body[:index])))
    one = record_qubits(dataclasses.replace(noisy, body=rep.body))
    per = len(one)
    per_round = max((one.count(q) for q in set(one)), default=0)
    lo, hi = before + 2 * per, before + 3 * per
    extra = n - KEEP
    out: list[DetectorBudget] = []
    for d, p, fams in zip(cs.detectors, fs.detector_probability, fs.detector_families):
        top = max(d.measurements)
        shares = scaled(fams, p)
        if top < lo:
            out.append(DetectorBudget(d.measurements, d.round, p, shares))
        elif top < hi:
            for t in range(extra + 1):
                ms = tuple(i + t * per for i in d.measurements)
                out.append(DetectorBudget(ms, d.round + t * per_round, p, shares))
        else:
            ms = tuple(i + extra * per if i >= lo else i for i in d.measurements)
            out.append(DetectorBudget(ms, d.round + extra * per_round, p, shares))
    out.sort(key=lambda d: (max(d.measurements), d.measurements))
    logical = tuple(tuple(i + extra * per if i >= hi else i for i in o) for o in cs.observables)
    after_big = {d.measurements: p for d, p in zip(cb.detectors, fb.detector_probability)}
    steady = all(
        math.isclose(p, after_big.get(tuple(i + per if i >= lo else i for i in d.measurements), -1.0),
                     rel_tol=1e-9, abs_tol=1e-15)
        for d, p in zip(cs.detectors, fs.detector_probability) if max(d.measurements) >= hi)
    ls, lb = fs.log_none_fires, fb.log_none_fires
    any_fires = -math.expm1(ls + extra * (lb - ls))
    rs, rb = fs.any_family_rates, fb.any_family_rates
    fams = {f: rs.get(f, 0.0) + extra * (rb.get(f, 0.0) - rs.get(f, 0.0)) for f in set(rs) | set(rb)}
    return Folded(tuple(out), logical, any_fires, scaled(fams, any_fires), cs.num_measurements + extra * per,
                  cs.random_rank + extra * (cb.random_rank - cs.random_rank), small, cs,
                  -math.expm1(ts + extra * (tb - ts)), steady, fs.coherent_twirled or fb.coherent_twirled)


def scaled(parts: dict[str, float], total: float) -> dict[str, float]:
    """The parts rescaled so that they add up to ``total`` (empty when they add up to 0)."""
    s = sum(parts.values())
    return {k: v / s * total for k, v in parts.items()} if s else {}
