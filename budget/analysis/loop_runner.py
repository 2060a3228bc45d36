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

from budget.analysis.select import AUTO_ORDER, choose_engine
from budget.errors.noisy import NoisyCircuit
from budget.errors.retune import with_knob_values
from budget.problems import TooLargeError

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


def quick_enough(first, circuit: NoisyCircuit, metric: str, seconds: float, notes: list[str]):
    """``first``, or the next engine of ``auto``'s order whose estimated run time (engines that
    estimate it) is within ``seconds``; the quickest estimate when none is."""
    estimate = getattr(first, "estimate_seconds", None)
    if estimate is None or estimate(circuit, metric) <= seconds or first.name not in AUTO_ORDER:
        return first
    best, best_time = first, estimate(circuit, metric)
    for name in AUTO_ORDER[AUTO_ORDER.index(first.name) + 1:]:
        try:
            other = choose_engine(circuit, metric, name, brief=True)
        except TooLargeError:
            continue
        guess = getattr(other, "estimate_seconds", lambda c, m: 0.0)(circuit, metric)
        if guess < best_time:
            best, best_time = other, guess
        if guess <= seconds:
            break
    if best is not first:
        notes.append(f"one {first.name} run would take about {estimate(circuit, metric):.2g} s, too slow for the "
                     f"loop; it used the {best.name} engine")
    return best


def faster(runner: TimedRunner, floor: float, circuit: NoisyCircuit, metric: str, zero: dict, max_seconds: float,
            notes: list[str]) -> tuple[TimedRunner, float]:
    """The next engine of ``auto``'s order that fits, when one run of the first takes too long for
    the loop (about :data:`RUNS_PER_PATTERN` runs must fit into ``max_seconds``)."""
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
