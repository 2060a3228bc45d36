"""Engine runs for the closed loop of tolerances, within a time plan.

The closed loop (:mod:`budget.analysis.closed_loop`) runs an engine many times on the circuit
with its knobs set to trial values (:func:`budget.errors.retune.with_knob_values`). One run of the
most accurate engine can take long (the exact engine on six qubits with the process metric takes
tens of seconds), so the runner keeps a deadline, and ``auto`` gives way to the next engine of its
order (exact → clifford → generators) when one run would not let about :data:`RUNS_PER_PATTERN`
evaluations fit into the planned time: by the engine's own estimate where it has one
(``estimate_seconds``), else by the time the first run took. Which engine comes next is the front
door's answer (:func:`budget.engines.escalation.quicker`, :func:`budget.engines.escalation.next_engine`).
"""

from __future__ import annotations

import time
from dataclasses import dataclass

from budget.analysis.measured import detector_values, measured_values
from budget.engines.base import MEASURED_METRICS
from budget.engines.door import choose_engine, estimate_seconds, estimates
from budget.engines.escalation import next_engine, quicker
from budget.errors.noisy import NoisyCircuit
from budget.errors.retune import with_knob_values
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


@dataclass(frozen=True)
class MeasuredValue:
    infidelity: float
    warnings: tuple[str, ...] = ()
    beyond_range: str | None = None


class MeasuredEngine:
    """The detector or record metric as an engine for the loop (:func:`measured_values`: the exact
    engine with branches where it fits under ``auto``, else the Pauli frames with coherent classes);
    with ``detector`` the firing probability of that detector (its number in the detector list).
    ``name`` is the engine that ran last (``engine`` before the first run)."""

    def __init__(self, engine: str, detector: int | None = None) -> None:
        self.engine = engine
        self.detector = detector
        self.name = engine

    def run(self, circuit: NoisyCircuit, metric: str) -> MeasuredValue:
        if self.detector is None:
            actual, _, self.name = measured_values(circuit, metric, self.engine)
        else:
            _, _, probs, self.name = detector_values(circuit, self.engine)
            actual = probs[self.detector]
        return MeasuredValue(float(actual))


def loop_engine(circuit: NoisyCircuit, metric: str, engine: str, detector: int | None = None):
    """The engine the loop runs: :class:`MeasuredEngine` for the detector and record metrics,
    else the door's choice (its brief form)."""
    if metric in MEASURED_METRICS:
        return MeasuredEngine(engine, detector)
    return choose_engine(circuit, metric, engine, brief=True)


def run_seconds(engine, circuit: NoisyCircuit, metric: str) -> float | None:
    """The engine's own estimate of one run, when it gives one (``estimate_seconds``), else
    None. Estimates, unlike measured times, do not change with the machine's load, so the loop's
    choices (engine, sign patterns) are reproducible."""
    if metric in MEASURED_METRICS:  # the loop's own adapter (MeasuredEngine) has no estimate
        return None
    return estimate_seconds(engine, circuit, metric) if estimates(engine) else None


def quick_enough(first, circuit: NoisyCircuit, metric: str, seconds: float, notes: list[str]):
    """``first``, or the engine the front door finds quick enough for ``seconds`` per run
    (:func:`budget.engines.escalation.quicker`); a note when it changed."""
    if metric in MEASURED_METRICS:
        return first
    engine, note = quicker(first, circuit, metric, seconds)
    if note:
        notes.append(note)
    return engine


def faster(runner: TimedRunner, floor: float, circuit: NoisyCircuit, metric: str, zero: dict, max_seconds: float,
           notes: list[str]) -> tuple[TimedRunner, float]:
    """The next engine of ``auto``'s order that fits (:func:`budget.engines.escalation.next_engine`),
    when the first run of an engine without an estimate took more than half of ``max_seconds``."""
    slow = time.monotonic() - runner.start
    if metric in MEASURED_METRICS:  # MeasuredEngine already takes the exact engine only where it fits
        return runner, floor
    other = next_engine(runner.engine, circuit, metric)
    if other is None:
        return runner, floor
    timed = TimedRunner(circuit, metric, other, max_seconds)
    faster_floor = timed(zero)
    notes.append(f"one {runner.engine.name} run takes {slow:.2g} s, too slow for the loop; it used the "
                 f"{other.name} engine")
    return timed, faster_floor
