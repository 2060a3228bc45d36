"""Tolerances in closed loop: run the circuit with every knob at its tolerance and correct them.

The tolerances of :func:`budget.analysis.tolerances.tolerances` invert the leading-order form
e ≈ δᵀAδ + s. Where that form is poor (large angles, a first order that cancels, many
interfering knobs), the knobs set to their tolerances can give far more, or less, than the target.
This module checks and corrects them with the most accurate engine that fits
(:func:`budget.engines.door.choose_engine`: exact where it fits):

1. **Knobs without a first-order effect** (A_ff at rounding level, e.g. an over-rotation echoed by
   the gates around it) get their tolerance from the engine as a function of the knob alone: the
   root x of e(x) - e(0) = B/n (B the coherent budget, n the number of tolerance rows) by
   Brent's method (scipy.optimize.brentq) on [0, π]; knobs that cancel only each other (x and y
   in an XY4 echo) are searched jointly. A knob whose effect stays below that share up to π is
   capped at π; one with no effect at all is reported as such.
2. **The achieved infidelity** at tolerances t: for ``random``, the mean over the sign patterns
   of the sites; for ``worst``, the largest (:mod:`budget.analysis.sign_patterns` says which
   patterns). Knobs with no effect found stay at today's value.
3. **Refinement**: all tolerances are scaled by one factor c aiming at achieved(c) = 0.975 E,
   accepted within [0.95, 1] × E: power-law steps first (the coherent part grows as c^p), then
   brentq on a bracket (:func:`_refine`). Each tolerance stays at most π.
4. **Today**: the same at today's sizes, and the common factor F with which today's sizes / F
   reach E.

Engine runs follow a time plan (:mod:`budget.analysis.loop_runner`).

Brent's method: R. P. Brent, "Algorithms for Minimization without Derivatives" (Prentice-Hall, 1973).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np
from scipy.optimize import brentq

from budget.analysis.loop_runner import RUNS_PER_PATTERN, TimedRunner, faster, loop_engine, quick_enough, run_seconds
from budget.analysis.sign_patterns import describe, joint_signs, patterns_for
from budget.analysis.tolerances import LEADING_ORDER_ONLY, ToleranceReport, make_row
from budget.engines.base import QuadraticForm
from budget.errors.noisy import NoisyCircuit
from budget.problems import TooLargeError

ACCEPT = (0.95, 1.0)
"""The refinement accepts the achieved infidelity within this fraction of the target (aiming at 0.975)."""
NO_EFFECT_BELOW = 1e-6
"""An effect below this fraction of a knob's share of the budget counts as none (the exact engine's
paths differ by rounding at the 1e-10 level)."""
@dataclass(frozen=True)
class ClosedLoop:
    """How the tolerances were checked and corrected.

    Attributes:
        engine: the engine that evaluated the circuit (``"exact"`` where it fits).
        target: E.
        achieved: the infidelity with every knob at its reported tolerance (random: mean over
            sign patterns; worst: the worst pattern found).
        std_error: standard error of ``achieved`` when sign patterns were sampled (else 0).
        before_refinement: the same quantity before the common scaling (at the leading-order
            tolerances, knobs without a first-order effect at their own second-order ones).
        scale: the common factor applied to the leading-order tolerances.
        floor: the engine's infidelity with every coherent knob at zero.
        method: how the sign patterns were covered, in plain words.
        worst_signs: site key ``"cz q[0],q[1].cphase"`` -> ±1 of the worst pattern (worst only).
        evaluations: engine runs used; seconds: their wall time.
        converged: ``achieved`` lies within [0.95, 1] × E.
        notes: plain-word caveats (engine warnings at the final point, caps, time limit).
        today: the same aggregate at today's sizes (|δ| of every site, signs as assumed).
        common_factor: F from the engine: today's sizes divided by F give E (None: not found).
    """

    engine: str
    target: float
    achieved: float
    std_error: float
    before_refinement: float
    scale: float
    floor: float
    method: str
    worst_signs: dict[str, int]
    evaluations: int
    seconds: float
    converged: bool
    notes: tuple[str, ...] = field(default=())
    today: float | None = None
    common_factor: float | None = None

    def as_json(self) -> dict:
        """JSON-ready form (docs/tolerances.md)."""
        out = dict(self.__dict__)
        out["notes"] = list(self.notes)
        out["ratio"] = self.achieved / self.target
        return out


def close_loop(
    report: ToleranceReport,
    circuit: NoisyCircuit,
    qf: QuadraticForm,
    *,
    engine: str = "auto",
    seed: int = 0,
    max_seconds: float = 20.0,
    detector: int | None = None,
) -> ToleranceReport:
    """``report`` with tolerances checked and corrected by an engine run (module docstring).

    Args:
        report: from :func:`~budget.analysis.tolerances.tolerances` on ``qf``.
        circuit: the noisy circuit whose knob rows are the site rows of ``report`` (the row
            labels of ``qf``).
        qf: the site-level quadratic form behind ``report`` (for the leading-order worst pattern).
        engine: ``"auto"`` (the most accurate that fits) or an engine name.
        seed: seed of the sampled sign patterns.
        max_seconds: the planned wall time: fewer sign patterns are used when one engine run is
            slow (the method says so); at twice this the loop stops and says so, keeping the
            largest tolerances found to meet the target if there are any.
        detector: detector metric only: the target is on this detector's firing probability.
    """
    if not report.feasible or not report.rows:
        return report
    notes: list[str] = []
    try:
        chosen = loop_engine(circuit, report.metric, engine, detector)
        if engine == "auto":
            chosen = quick_enough(chosen, circuit, report.metric, max_seconds / RUNS_PER_PATTERN, notes)
        runner = TimedRunner(circuit, report.metric, chosen, max_seconds)
    except TooLargeError as exc:
        return replace(report, warnings=report.warnings + (f"tolerances not checked in closed loop: {exc}",))
    rows = list(report.rows)
    sites = [((s.site, s.knob), r_i) for r_i, r in enumerate(rows) for s in r.sites]
    keys = [k for k, _ in sites]
    t0 = np.array([s.tolerance_rad for r in rows for s in r.sites], dtype=float)
    zero = {k: 0.0 for k in keys}
    try:
        floor = runner(zero)
        measured = max(time.monotonic() - runner.start, 1e-4)
        if engine == "auto" and run_seconds(runner.engine, circuit, report.metric) is None and measured > max_seconds / 2:
            runner, floor = faster(runner, floor, circuit, report.metric, zero, max_seconds, notes)
            measured = max(time.monotonic() - runner.start, 1e-4)
        if floor >= report.target:
            notes.append(f"{runner.engine.name}: with every coherent knob at zero the infidelity is {floor:.3g}, "
                         f"at or above the target {report.target:g}: no tolerance meets it")
            t = np.zeros(len(keys))
            return _finish(report, rows, keys, t, t0, ClosedLoop(runner.engine.name, report.target, floor, 0.0, floor, 0.0, floor,
                           "the incoherent floor alone", {}, runner.runs, time.monotonic() - runner.start, False, tuple(notes),
                           floor, None))
        share = (report.target - floor) / max(1, len(rows))
        per_run = run_seconds(runner.engine, circuit, report.metric) or measured or 1e-4
        _second_order_tolerances(runner, rows, [ri for _, ri in sites], keys, t0, floor, share, report.assume, seed)
        live = np.isfinite(t0) & (t0 > 0)
        live_keys = [k for k, on in zip(keys, live) if on]
        # knobs with no effect found stay at today's value (they combine with the others at higher order)
        today = {k: s.current_rad for k, s, t in zip(keys, (s for r in rows for s in r.sites), t0) if not math.isfinite(t)}
        patterns = patterns_for(report.assume, qf, live_keys, seed, max(4, int(max_seconds / (RUNS_PER_PATTERN * per_run))))

        def at(t: np.ndarray) -> tuple[float, float, np.ndarray]:
            vals, used = [], patterns(t)
            for s in used:
                vals.append(runner({**zero, **today, **{k: float(x) for k, x in zip(live_keys, s * t)}}))
            vals = np.array(vals)
            if report.assume == "worst":
                return float(vals.max()), 0.0, used[int(np.argmax(vals))]
            err = float(vals.std(ddof=1) / math.sqrt(len(vals))) if patterns.kind == "sampled" else 0.0
            return float(vals.mean()), err, used[0]

        seen: dict[float, tuple] = {}  # every common factor tried, for a safe answer when time runs out

        def achieved(c: float) -> tuple[float, float, np.ndarray]:
            seen[c] = at(np.minimum(c * t0[live], math.pi))
            return seen[c]

        at_one = achieved(1.0)
        first = at_one[0]
        scale, (value, err, signs) = 1.0, at_one
        try:
            if not ACCEPT[0] * report.target <= first <= ACCEPT[1] * report.target and np.any(live):
                scale, value, err, signs = _refine(achieved, at_one, (ACCEPT[0] * report.target, ACCEPT[1] * report.target),
                                                   t0[live], floor)
        except TimeoutError:
            safe = [c for c, r in seen.items() if r[0] <= report.target]
            if not safe:
                raise
            scale = max(safe)
            value, err, signs = seen[scale]
            notes.append(f"the refinement stopped after {runner.limit:g} s of engine runs at the largest tolerances "
                         "found to meet the target")
        converged = ACCEPT[0] * report.target <= value <= ACCEPT[1] * report.target * (1 + 1e-9)
        now = np.abs([s.current_rad for r in rows for s in r.sites])[live]
        try:
            today_value, factor = (first, None) if not np.any(now) else _common_factor(at, now, report.target, floor)
        except TimeoutError:
            today_value, factor = None, None
            notes.append("no time left to check today's values with the engine; the common factor is leading order")
    except TimeoutError:
        notes.append(f"closed loop stopped after {runner.limit:g} s of engine runs; the tolerances are leading order")
        return replace(report, warnings=report.warnings + tuple(notes))
    t = np.where(live, np.minimum(scale * np.where(live, t0, 0.0), math.pi), t0)
    if runner.last_warnings and runner.engine.name != "exact":
        notes += [f"{runner.engine.name} at the tolerances: {w}" for w in runner.last_warnings]
    unseen = sorted({f"{rows[ri].family}.{rows[ri].knob}" for (_, ri), t_i in zip(sites, t0)
                     if rows[ri].order == "none" and math.isinf(t_i)})
    if unseen and runner.engine.name != "exact":
        notes.append(f"{', '.join(unseen)}: no first-order effect, and the {runner.engine.name} engine (the exact one "
                     "does not fit) found none either; an effect of higher order than it computes, such as an echo's "
                     "second-order build-up, would be missed: check a smaller instance with the exact engine")
    if not converged:
        why = ("no knob with an effect was found" if not np.any(live) else
               "every tolerance is at its π cap" if np.all(t[live] >= math.pi) else "the refinement did not settle")
        notes.append(f"the achieved {value:.3g} is not within 5 % below the target {report.target:g}: {why}")
    method = describe(report.assume, len(live_keys), patterns)
    worst = {f"{k[0]}.{k[1]}": int(s) for k, s in zip(live_keys, signs)} if report.assume == "worst" else {}
    loop = ClosedLoop(runner.engine.name, report.target, value, err, first, scale, floor, method, worst,
                      runner.runs, time.monotonic() - runner.start, converged, tuple(notes), today_value, factor)
    out = _finish(report, rows, keys, t, t0, loop)
    if converged and loop.engine == "exact":  # exact at the tolerances: the leading-order caveats are settled
        out = replace(out, warnings=tuple(w for w in out.warnings if not w.startswith(LEADING_ORDER_ONLY)))
    return out


def _second_order_tolerances(runner: Callable, rows: list, row_of: list[int], keys: list, t0: np.ndarray, floor: float,
                             share: float, assume: str, seed: int) -> None:
    """Fill ``t0`` (in place) for the sites of rows without a first-order effect: each row on its
    own (all its sites with one sign), then the rows still without an effect together (knobs that
    cancel only each other, as x and y in an XY4 echo) over :func:`joint_signs`."""
    zero = {k: 0.0 for k in keys}
    for r_i, row in enumerate(rows):
        idx = [i for i, ri in enumerate(row_of) if ri == r_i]
        if row.order == "none":
            same = np.array([[1.0] * len(idx), [-1.0] * len(idx)])
            t0[idx] = _second_order(runner, zero, [keys[i] for i in idx], floor, share, assume, same)
    idle = [i for i, ri in enumerate(row_of) if rows[ri].order == "none" and math.isinf(t0[i])]
    if len(idle) > 1:
        n_rows = len({row_of[i] for i in idle})
        t0[idle] = _second_order(runner, zero, [keys[i] for i in idle], floor, share * n_rows, assume,
                                 joint_signs(len(idle), seed))


def _second_order(runner: Callable, zero: dict, keys: list, floor: float, share: float, assume: str,
                  signs: np.ndarray) -> float:
    """The common tolerance x of knobs without a first-order effect: the aggregate over the sign
    patterns ``signs`` (rows over ``keys``) of e(x) - e(0) equals ``share``; brentq on the first
    bracket of the grid π/16, π/8, π/4, π/2, π. π (capped) when the effect stays below the share,
    ``inf`` when it stays below :data:`NO_EFFECT_BELOW` of it (engine rounding, not an effect)."""
    def excess(x: float) -> float:
        vals = [runner({**zero, **{k: float(v) for k, v in zip(keys, x * s)}}) for s in signs]
        return (max(vals) if assume == "worst" else float(np.mean(vals))) - floor - share

    low, largest = 0.0, -share
    for x in (math.pi / 16, math.pi / 8, math.pi / 4, math.pi / 2, math.pi):
        value = excess(x)
        if value > 0:
            return brentq(excess, low, x, xtol=1e-7, rtol=1e-4)
        low, largest = x, max(largest, value)
    return math.pi if largest + share > NO_EFFECT_BELOW * share else math.inf


def _common_factor(at: Callable, now: np.ndarray, target: float, floor: float) -> tuple[float, float | None]:
    """(aggregate at today's sizes, F) with the aggregate at today's sizes / F within 1 % below
    the target."""
    today = at(np.minimum(now, math.pi))
    c, value, *_ = _refine(lambda c: at(np.minimum(c * now, math.pi)), today, (0.99 * target, target), now, floor)
    return today[0], (1 / c if c > 0 and 0.99 * target <= value <= target * (1 + 1e-9) else None)


def _refine(achieved: Callable, at_one: tuple, window: tuple[float, float], t_live: np.ndarray, floor: float):
    """The common factor c with achieved(c) inside ``window``.

    First up to three power-law steps: the coherent part achieved(c) - floor grows as c^p (p = 2
    at leading order, 4 for a second-order knob; p is re-estimated from the last two points), so
    c ← c · ((goal - floor)/(achieved(c) - floor))^(1/p) with goal the middle of the window; this
    usually lands in one or two runs. Otherwise the root is bracketed by halving or doubling and
    found by brentq. Returns (c, value, error, signs).
    """
    goal = (window[0] + window[1]) / 2
    cache: dict[float, tuple] = {1.0: at_one}
    cap = math.pi / float(np.min(t_live))  # beyond it every tolerance sits at π

    def f(c: float) -> float:
        if c not in cache:
            cache[c] = achieved(c)
        return cache[c][0] - goal

    def inside(c: float) -> bool:
        return window[0] <= cache[c][0] <= window[1] * (1 + 1e-9)

    c, p = 1.0, 2.0
    for _ in range(3):
        excess, wanted = cache[c][0] - floor, goal - floor
        if excess <= 0 or wanted <= 0:
            break
        step = min(c * (wanted / excess) ** (1 / p), cap)
        if step == c:
            break
        f(step)
        new_excess = cache[step][0] - floor
        if new_excess > 0 and abs(math.log(step / c)) > 1e-6:
            p = min(max(math.log(new_excess / excess) / math.log(step / c), 0.5), 8.0)
        c = step
        if inside(c):
            return (c, *cache[c])
    below = [x for x in cache if cache[x][0] < goal]
    above = [x for x in cache if cache[x][0] > goal]
    lo = max(below) if below else min(cache)
    hi = min((x for x in above if x > lo), default=max(cache))
    while f(lo) > 0 and lo > 1e-12:
        hi, lo = lo, lo / 2
    while f(hi) < 0 and hi < cap:
        lo, hi = hi, min(hi * 2, cap)
    if f(hi) < 0:
        return (hi, *cache[hi])
    c = brentq(f, lo, hi, xtol=1e-12, rtol=1e-5)
    if not inside(c) and f(lo) + goal <= window[1]:  # a jump, no root: take the safe end
        c = lo
    return (c, *cache[c])


def _finish(report: ToleranceReport, rows: list, keys: list, t: np.ndarray, t0: np.ndarray, loop: ClosedLoop) -> ToleranceReport:
    """The report with corrected site tolerances, rows rebuilt, the check attached."""
    new_rows, i = [], 0
    for row in rows:
        n = len(row.sites)
        sites = [replace(s, tolerance_rad=float(t[i + j])) for j, s in enumerate(row.sites)]
        order = "second" if row.order == "none" and np.any(np.isfinite(t0[i:i + n])) else row.order
        new = make_row((row.family, row.knob), sites, feasible=report.feasible, order=order,
                       first_order_rad=row.first_order_rad)
        new_rows.append(new)
        i += n
    new_rows.sort(key=lambda r: (-r.tighten_by, -abs(r.current_rad), r.family, r.knob))
    factor = report.common_factor if loop.common_factor is None else loop.common_factor
    return replace(report, rows=tuple(new_rows), closed_loop=loop, common_factor=factor)
