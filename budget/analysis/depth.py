"""Infidelity against repetition count: naive, structured and twirled, and where they part.

For a block (one cycle of the circuit) repeated N times, three curves (design.md §3, §5):

- **naive**: the fidelity product, exact in closed form: 1 - Π_N = 1 - (1 - e_1)^N, e_1 the naive
  infidelity of one cycle (:func:`budget.errors.fidelity.naive_infidelity`);
- **structured**: the actual infidelity of N cycles from an engine; engines keep the repeat folded
  (exact: matrix powers through a Schur decomposition; generators: the periodic closed form of
  :mod:`budget.engines.matrices.periodic`), so a point costs the same for N = 10 and N = 10**9 and no
  point re-simulates the circuit;
- **twirled**: the same for the Pauli-twirled cycle (Wallman & Emerson, Phys. Rev. A 94, 052325
  (2016)), where coherent errors add in probability, so the curve grows linearly in N at first.

Coherent errors that commute with the cycle add in amplitude: the structured curve grows as N²
and leaves the naive one, which grows as N. The *crossover* is the first N where the structured
value exceeds twice the naive one. With a target E, the *deepest* count of each curve is the
largest N before the curve first exceeds E. Both are found on the log-spaced grid and refined by
bisection between the last grid point below and the first above (assumed to hold one crossing).

Which error components build up and which are echoed away: :mod:`budget.analysis.accumulation`.
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np

from budget.analysis.ratios import at_rounding_level
from budget.engines.door import check_time, choose
from budget.engines.escalation import exact_if_fits, sweep_engine
from budget.errors.noisy import NoisyCircuit, NoisyRepeat
from budget.engines.base import MEASURED_METRICS
from budget.engines.generators.engine import STOCHASTIC_LIMIT
from budget.problems import InputError

from budget.analysis.accumulation import components_or_note
from budget.analysis.curves import CROSSOVER_FACTOR, CURVE_WORDS, CURVES, JSON_KEYS, DepthCurve
from budget.analysis.measured import measured_values, naive_measured
from budget.analysis.twirl import twirled_circuit
from budget.errors.fidelity import naive_infidelity

__all__ = ["CROSSOVER_FACTOR", "CURVE_WORDS", "CURVES", "JSON_KEYS", "DepthCurve", "depth_curve", "repetition_grid"]
MAX_POINTS = 200

Progress = Callable[[int, int], None]
MAX_CLOSED_FORM_QUBITS = 10
EXACT_CURVE_QUBITS = 3
"""With engine ``auto``, cycles on up to this many qubits use the exact engine at every point."""
EXACT_FALLBACK_QUBITS = 4
"""With engine ``auto``, curves of a cycle on up to this many qubits switch to the exact engine from
the N where the first-order closed form stops being accurate (above the generators engine's
STOCHASTIC_LIMIT) or leaves its range (about 0.1 s per point at 4 qubits with one
BLAS thread on the test machine; 5 qubits took up to 5 s per point, too slow for 25 points)."""


def repetition_grid(max_cycles: int, points: int) -> tuple[int, ...]:
    """Up to ``points`` distinct whole numbers from 1 to max_cycles, spaced evenly in log N.

    >>> repetition_grid(1000, 4)
    (1, 10, 100, 1000)
    >>> repetition_grid(3, 10)
    (1, 2, 3)
    """
    if points < 2:
        raise InputError(f"points = {points}: expected at least 2")
    raw = np.unique(np.rint(np.logspace(0, math.log10(max_cycles), points)).astype(np.int64))
    grid = sorted({int(x) for x in raw} | {1, int(max_cycles)})
    return tuple(grid)


class _Series:
    """One curve as a function of N, with a cache (each value is one engine run).

    ``fn(n)`` gives (value, in range); a value beyond its engine's range is None, so no curve
    jumps to a clipped 1: it stops where its engine stops holding, and :meth:`range_end` says where.
    """

    def __init__(self, fn: Callable[[int], tuple[float, bool]]):
        self._fn = fn
        self._cache: dict[int, float | None] = {}

    def __call__(self, n: int) -> float | None:
        if n not in self._cache:
            value, ok = self._fn(n)
            self._cache[n] = float(min(max(value, 0.0), 1.0)) if ok else None
        return self._cache[n]

    def range_end(self, grid: tuple[int, ...]) -> int | None:
        """The first N beyond the engine's range (None: in range over the whole grid)."""
        return _first_true(lambda n: self(n) is None, grid)


def _first_true(pred: Callable[[int], bool], grid: tuple[int, ...]) -> int | None:
    """Smallest N with pred(N), searching the grid then bisecting the gap before the first hit."""
    prev = 0
    for n in grid:
        if pred(n):
            lo, hi = prev, n  # pred(lo) false (or lo = 0), pred(hi) true
            while hi - lo > 1:
                mid = (lo + hi) // 2
                if pred(mid):
                    hi = mid
                else:
                    lo = mid
            return hi
        prev = n
    return None


def _engine_series(block: NoisyCircuit, metric: str, engine: str, label: str, deepest: int,
                   work: float = 1.0) -> tuple[_Series, str, list[str]]:
    """One curve from an engine.

    ``auto`` on up to EXACT_CURVE_QUBITS qubits: the exact engine at every point (matrix powers, cheap
    at that size). Else, for the process metric, the engine's closed-form repeat sweep where the
    front door has one for the request (:func:`budget.engines.escalation.sweep_engine`: the generators
    engine's periodic closed form, :class:`budget.engines.generators.depth.RepeatSweep`): one
    propagation of the cycle, then any N at O(d³), the same values as one engine run per N.
    Otherwise every point is one run of the chosen engine on the folded repeat (the exact engine
    takes matrix powers, the clifford engine folds whole periods); the engine is chosen for the
    deepest point ``deepest``, the costliest one, among the engines that fold repeats or, where none
    of them holds the circuit (or all are estimated too slow), the pauli engine, which walks a
    non-Clifford repeat cycle by cycle (with an early stop, :mod:`budget.engines.pauli._sweep`):
    then the curve's whole cost, ``work`` times the deepest point's (Σ of the grid's N over the
    deepest N), is checked against the time limit (:func:`budget.engines.door.check_time`)."""
    notes: list[str] = []
    small = engine == "auto" and block.num_qubits <= EXACT_CURVE_QUBITS
    if (metric == "process" and not small and block.later_body is None
            and block.num_qubits <= MAX_CLOSED_FORM_QUBITS):  # the closed form repeats one cycle as it is
        sweeper = sweep_engine(block, metric, engine)
        if sweeper is not None:
            sweep = sweeper.repeat_sweep(block, metric)
            return _Series(sweep.at), f"{sweeper.name} (periodic closed form)", notes
    chosen = choose(_repeated(block, deepest), metric, engine, brief=True, repeats_folded=True).engine
    if not chosen.folds_repeats:
        check_time(_repeated(block, deepest), metric, chosen, runs=max(1, math.ceil(work)), what=f"the {label} depth curve")

    def run(n: int) -> tuple[float, bool]:
        result = chosen.run(_repeated(block, n), metric)
        if result.warnings and result.beyond_range is None and not notes:
            notes.append(f"{label} curve ({chosen.name} engine), from N = {n:,} on: {result.warnings[0]}")
        return result.infidelity, result.beyond_range is None

    return _Series(run), chosen.name, notes


def _measured_curve(block: NoisyCircuit, grid: tuple[int, ...], metric: str, engine: str, target: float | None,
                    progress: Progress | None) -> DepthCurve:
    """Depth curves of the detector or record metric: the whole circuit (a round) repeated N times,
    detectors inferred anew at every N. Naive: 1 - (1 - e₁)^N from the one-round product."""
    one = naive_measured(block)
    names: list[str] = []
    values: dict[str, list[float]] = {c: [] for c in CURVES}
    for i, n in enumerate(grid):
        actual, twirled, name = measured_values(_repeated(block, n), metric, engine)
        names.append(name)
        values["naive"].append(1.0 - (1.0 - one) ** n)
        values["structured"].append(actual)
        values["twirled"].append(twirled)
        if progress is not None:
            progress(i + 1, len(grid))
    deepest: dict[str, int | None] = {}
    if target is not None:
        for c in CURVES:
            bad = [n for n, v in zip(grid, values[c]) if v > target]
            deepest[c] = grid[-1] if not bad else (max((n for n in grid if n < bad[0]), default=None))
    crossover = next((n for n, a, b in zip(grid, values["structured"], values["naive"]) if a > CROSSOVER_FACTOR * b), None)
    return DepthCurve(
        source=block.source, metric=metric, engine="/".join(dict.fromkeys(names)),
        twirled_engine="clifford (Pauli frames)" if metric == "detectors" else "exact",
        repetitions=grid, naive=tuple(values["naive"]), structured=tuple(values["structured"]),
        twirled=tuple(values["twirled"]), crossover_repetitions=crossover, target=target, deepest=deepest,
        components=(), warnings=(f"{metric} metric: each point is computed on the unrolled grid count"
                                 + (" (detectors inferred anew)" if metric == "detectors" else "")
                                 + ", only the grid points are evaluated",),
    )


def _repeated(block: NoisyCircuit, n: int) -> NoisyCircuit:
    """``block`` run ``n`` times; when pulse bleed crosses the seam between repetitions, the first
    repetition is ``block.body`` and the others ``block.later_body`` (as attach peels a repeat)."""
    if n == 1:
        body = block.body
    elif block.later_body is not None:
        body = (*block.body, NoisyRepeat(block.later_body, int(n) - 1))
    else:
        body = (NoisyRepeat(block.body, int(n)),)
    return NoisyCircuit(block.qubits, body, dict(block.readout_error), block.source)


def depth_curve(
    block: NoisyCircuit,
    *,
    max_cycles: int,
    points: int = 25,
    metric: str = "process",
    engine: str = "auto",
    target: float | None = None,
    progress: Progress | None = None,
) -> DepthCurve:
    """Naive, structured and twirled infidelity of 1 … ``max_cycles`` repetitions of ``block``.

    Args:
        block: one cycle, error model attached.
        max_cycles: the deepest repetition count N (1 <= N <= 10**18).
        points: log-spaced grid points (2 … 200; fewer when N is small).
        metric: ``"process"`` or ``"state"``.
        engine: ``"auto"`` or an engine name, used for the structured and the twirled curve.
        target: E in (0, 1) for the deepest count of each curve, or None.
        progress: called as progress(done, total) over the grid.
    """
    if isinstance(max_cycles, bool) or not isinstance(max_cycles, int) or not 1 <= max_cycles <= 10**18:
        raise InputError(f"max_cycles = {max_cycles!r}: expected a whole number from 1 to 10**18")
    if isinstance(points, bool) or not isinstance(points, int) or not 2 <= points <= MAX_POINTS:
        raise InputError(f"points = {points!r}: expected a whole number from 2 to {MAX_POINTS}")
    if target is not None and not 0 < target < 1:
        raise InputError(f"target = {target!r}: expected an infidelity E with 0 < E < 1")
    grid = repetition_grid(max_cycles, points)
    if metric in MEASURED_METRICS:
        return _measured_curve(block, grid, metric, engine, target, progress)
    log_keep = math.log1p(-min(naive_infidelity(block), 1.0)) if naive_infidelity(block) < 1 else -math.inf
    naive = _Series(lambda n: (-math.expm1(n * log_keep) if log_keep > -math.inf else 1.0, True))
    work = sum(grid) / max_cycles  # cost of the whole grid in deepest points, for engines walking cycle by cycle
    structured, name, notes = _engine_series(block, metric, engine, "actual", max_cycles, work)
    tw_block = twirled_circuit(block)
    twirled, tw_name, tw_notes = _engine_series(tw_block, metric, engine, "twirled", max_cycles, work)
    series = {"naive": naive, "structured": structured, "twirled": twirled}
    switches: dict[str, int] = {}
    if engine == "auto" and block.num_qubits <= EXACT_FALLBACK_QUBITS:
        for key, cycle in (("structured", block), ("twirled", tw_block)):
            # switch where the first-order value stops being accurate (the generators engine warns
            # from STOCHASTIC_LIMIT on), not only where it stops being a probability, so the curve
            # at N = 1 is the headline's exact value whenever the headline came from exact
            end = _first_true(lambda n, s=series[key]: s(n) is None or s(n) > STOCHASTIC_LIMIT, grid)
            exact = exact_if_fits(_repeated(cycle, 2), metric) if end is not None else None
            if exact is not None:
                series[key] = _switched(series[key], end, cycle, metric, exact)
                switches[key] = end
    structured, twirled = series["structured"], series["twirled"]
    values: dict[str, list[float]] = {c: [] for c in CURVES}
    for i, n in enumerate(grid):
        for c in CURVES:
            values[c].append(series[c](n))
        if progress is not None:
            progress(i + 1, len(grid))
    crossover = _first_true(lambda n: _above(structured(n), CROSSOVER_FACTOR * naive(n)), grid)
    ends = {c: series[c].range_end(grid) for c in ("structured", "twirled")}
    deepest: dict[str, int | None] = {}
    if target is not None:
        for c in CURVES:  # beyond its range a curve cannot vouch for the target
            first_bad = _first_true(lambda n, s=series[c]: s(n) is None or s(n) > target, grid)
            deepest[c] = max_cycles if first_bad is None else (first_bad - 1 or None)
    components, note = components_or_note(block, metric)
    warnings = list(dict.fromkeys(notes + tw_notes))
    if note:
        warnings.append(note)
    return DepthCurve(
        source=block.source,
        metric=metric,
        engine=name,
        twirled_engine=tw_name,
        repetitions=grid,
        naive=tuple(values["naive"]),
        structured=tuple(values["structured"]),
        twirled=tuple(values["twirled"]),
        crossover_repetitions=crossover,
        target=target,
        deepest=deepest,
        components=components,
        warnings=tuple(warnings),
        range_ends={c: n for c, n in ends.items() if n is not None},
        switches=switches,
    )


def _switched(first: _Series, end: int, cycle: NoisyCircuit, metric: str, exact) -> _Series:
    """``first`` below N = ``end`` (where it is in range), the exact engine from there on
    (engine ``auto`` switches to an engine valid there, issue of values beyond range)."""

    def value(n: int) -> tuple[float, bool]:
        if n < end:
            v = first(n)
            return (0.0, False) if v is None else (v, True)
        return exact.run(_repeated(cycle, n), metric).infidelity, True

    return _Series(value)


def _above(value: float | None, bound: float) -> bool:
    """value > bound, with values beyond range (None) and at rounding level never above."""
    return value is not None and not at_rounding_level(value) and value > bound
