"""Engine runs for the closed loop of tolerances, within a time plan.

The closed loop (:mod:`budget.analysis.closed_loop`) runs an engine many times on the circuit
with its knobs set to trial values (:func:`budget.errors.retune.with_knob_values`). One run of the
most accurate engine can take long (the exact engine on six qubits with the process metric takes
tens of seconds), so the runner keeps a deadline, and ``auto`` gives way to the next engine of its
order (exact → clifford → generators) when one run would not let about :data:`RUNS_PER_PATTERN`
evaluations fit into the planned time: by the engine's own estimate where it has one
(``estimate_seconds``), else by the time the first run took.
"""

from __future__ import annotations

import time

from budget.engines.door import AUTO_ORDER, choose_engine
from budget.engines.exact.plan import make_plan
from budget.errors.noisy import NoisyCircuit
from budget.errors.retune import with_knob_values
from budget.problems import TooLargeError

MULTIPLY_ADDS_PER_S = 3e8
"""Complex multiply-adds per second assumed for the exact engine's estimate (one core of this
machine class; measured within a factor of 3 on the examples)."""
RUNS_PER_PATTERN = 8
"""Evaluations a refinement typically needs; the pattern count is chosen so that
patterns × this × (time of one run) stays within ``max_seconds``."""


class TimedRunner:
    """Engine runs with a wall-time limit."""

    def __init__(self, circuit: NoisyCircuit, metric: str, engine, max_seconds: float) -> None:
        self.circuit, self.metric, self.engine = circuit, metric, engine
        self.limit = 2 * max_seconds
        self.deadline = time.monotonic() + self.limit
        self.start = time.monotonic()
        self.runs = 0
        self.last_warnings: tuple[str, ...] = ()

    def __call__(self, values: dict[tuple[str, str], float]) -> float:
        if time.monotonic() > self.deadline:
            raise TimeoutError
        self.runs += 1
        res = self.engine.run(with_knob_values(self.circuit, values), self.metric)
        self.last_warnings = tuple(res.warnings)
        return float(res.infidelity)


def run_seconds(engine, circuit: NoisyCircuit, metric: str) -> float | None:
    """The engine's own estimate of one run, when it gives one (``estimate_seconds``); for the
    exact engine its plan's multiply-adds (:func:`budget.engines.exact.plan.make_plan`) at
    :data:`MULTIPLY_ADDS_PER_S`; else None. Estimates, unlike measured times, do not change with
    the machine's load, so the loop's choices (engine, sign patterns) are reproducible."""
    estimate = getattr(engine, "estimate_seconds", None)
    if estimate is not None:
        return float(estimate(circuit, metric))
    if engine.name == "exact":
        return make_plan(circuit, metric).work / MULTIPLY_ADDS_PER_S
    return None


def quick_enough(first, circuit: NoisyCircuit, metric: str, seconds: float, notes: list[str]):
    """``first``, or the next engine of ``auto``'s order whose estimated run time is within
    ``seconds`` (engines without an estimate count as quick); the quickest when none is."""
    first_time = run_seconds(first, circuit, metric)
    if first_time is None or first_time <= seconds or first.name not in AUTO_ORDER:
        return first
    best, best_time = first, first_time
    for name in AUTO_ORDER[AUTO_ORDER.index(first.name) + 1:]:
        try:
            other = choose_engine(circuit, metric, name, brief=True)
        except TooLargeError:
            continue
        guess = run_seconds(other, circuit, metric) or 0.0
        if guess < best_time:
            best, best_time = other, guess
        if guess <= seconds:
            break
    if best is not first:
        notes.append(f"one {first.name} run would take about {first_time:.2g} s, too slow for the loop; it used "
                     f"the {best.name} engine")
    return best


def faster(runner: TimedRunner, floor: float, circuit: NoisyCircuit, metric: str, zero: dict, max_seconds: float,
            notes: list[str]) -> tuple[TimedRunner, float]:
    """The next engine of ``auto``'s order that fits, when the first run of an engine without an
    estimate took more than half of ``max_seconds``."""
    slow = time.monotonic() - runner.start
    later = AUTO_ORDER[AUTO_ORDER.index(runner.engine.name) + 1:] if runner.engine.name in AUTO_ORDER else ()
    for name in later:
        try:
            other = TimedRunner(circuit, metric, choose_engine(circuit, metric, name, brief=True), max_seconds)
        except TooLargeError:
            continue
        faster_floor = other(zero)
        notes.append(f"one {runner.engine.name} run takes {slow:.2g} s, too slow for the loop; it used the "
                     f"{name} engine")
        return other, faster_floor
    return runner, floor
