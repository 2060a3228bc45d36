"""The runs around the engine choice: keeping answers in range, letting the exact engine answer
where a first-order result rests on a cancellation, depth-curve sweeps, and the closed loop's time
plan. The choice itself, the registry, ``auto``'s order and every refusal's wording are in
:mod:`budget.engines.door`.

The analysis layer calls :func:`run_one` (the main job: choice, range and cancellation checks, one
number), :func:`run_in_range`, :func:`sweep_engine` (a depth curve in closed form),
:func:`exact_if_fits`, and :func:`quicker` / :func:`next_engine` (the closed loop's time plan)."""

from __future__ import annotations

from dataclasses import dataclass

from budget.engines.base import Engine, EngineResult
from budget.engines.door import (
    AUTO_ORDER,
    MAX_SECONDS,
    check_time,
    choose,
    engine_order,
    estimate_seconds,
    estimates,
    get_engine,
)
from budget.errors.noisy import NoisyCircuit, NoisyRepeat


def escalate(circuit: NoisyCircuit, metric: str, requested: str, outcome: EngineResult) -> Engine | None:
    """For ``auto``: the exact engine, when a first-order engine's result rests on a cancellation
    (``details["rests_on_cancellation"]``, budget/engines/orders.py) and the exact engine
    fits and is estimated within MAX_SECONDS; else None. The caller runs it and says so."""
    if requested != "auto" or outcome.engine == "exact" or not outcome.details.rests_on_cancellation:
        return None
    exact = get_engine("exact")
    if exact.fits(circuit, metric) is not None or estimate_seconds(exact, circuit, metric) > MAX_SECONDS:
        return None
    return exact


# --- Keeping answers inside their engine's range (``auto`` only) ---------------------------------
# The first-order engines say when their approximation no longer holds (EngineResult.beyond_range).
# With ``auto`` such a result is not the answer: the other engines of AUTO_ORDER that fit (and are
# estimated to finish within MAX_SECONDS) are tried in turn and the first whose value is in range is
# used (after ``clifford``, the ``generators`` engine exponentiates the summed Hamiltonian, which
# stays accurate further, design.md §4). When none is in range the out-of-range result is kept and
# marked, so the views say plainly that the error is beyond the first-order range and by how much.


def run_in_range(circuit: NoisyCircuit, metric: str, chosen: Engine, requested: str, *,
                 observables: tuple[str, ...] = (), brief: bool = False) -> tuple[EngineResult, tuple[str, ...]]:
    """Run ``chosen``; with ``requested == "auto"`` and a result beyond range, try the other engines
    (their brief variants with ``brief``).

    Returns the result used and notes saying which engine was left and why.
    """
    outcome = chosen.run(circuit, metric, observables=observables)
    if outcome.beyond_range is None or requested != "auto" or chosen.name not in AUTO_ORDER:
        return outcome, ()
    for name in (n for n in AUTO_ORDER if n != chosen.name):
        other = get_engine(name).brief() if brief else get_engine(name)
        if other.fits(circuit, metric) is not None or estimate_seconds(other, circuit, metric) > MAX_SECONDS:
            continue
        candidate = other.run(circuit, metric, observables=observables)
        if candidate.beyond_range is None:
            note = (f"the {chosen.name} engine is beyond its range here ({outcome.beyond_range}); "
                    f"auto used the {name} engine, which is within its range")
            return candidate, (note,)
    return outcome, ()


# --- Entry points of the analysis layer -----------------------------------------------------------


@dataclass(frozen=True)
class Outcome:
    """The main job's one number: the result used, the choice line (``reason``), and notes on
    any switch (beyond range, cancellation) in plain words."""

    result: EngineResult
    reason: str
    notes: tuple[str, ...]


def run_one(circuit: NoisyCircuit, metric: str, requested: str = "auto", *, observables: tuple[str, ...] = (),
            options: dict | None = None) -> Outcome:
    """Choose (:func:`choose`), run, keep the answer in range (:func:`run_in_range`) and, for
    ``auto``, let the exact engine answer where a first-order result rests on a cancellation
    (:func:`escalate`). One engine gives the number and its family shares; another runs only
    when the first one's answer is not kept, and a note says why."""
    choice = choose(circuit, metric, requested, options=options)
    outcome, switched = run_in_range(circuit, metric, choice.engine, requested, observables=observables)
    if (better := escalate(circuit, metric, requested, outcome)) is not None:
        switched = (*switched, f"auto: the {outcome.engine} engine's result rested on a cancellation; the exact engine ran instead")
        outcome = better.run(circuit, metric, observables=observables)
    notes = list(switched)
    if requested == "auto" and outcome.engine == "pauli":
        notes.insert(0, f"auto: not every gate is Clifford and dense engines cannot hold this {circuit.num_qubits}-qubit "
                     "circuit or would be slower, so the sparse Pauli engine ran (first order, truncation bound stated)")
    reason = choice.reason if outcome.engine == choice.engine.name else f"{choice.reason}; then {outcome.engine} (the warnings say why)"
    return Outcome(outcome, reason, tuple(notes))


def sweep_engine(block: NoisyCircuit, metric: str, requested: str) -> Engine | None:
    """The engine whose closed-form repeat sweep (capability ``repeat_sweep``) gives a depth
    curve of the cycle ``block``, or None: ``requested`` is auto or an engine with the capability;
    the most accurate such engine of AUTO_ORDER that fits the cycle run twice; two runs' worth of
    its time is checked against MAX_SECONDS (:func:`check_time`: a refusal beyond it when the
    engine was named, None under ``auto``, whose curve then runs point by point)."""
    names = engine_order("repeat_sweep", False)
    if requested != "auto" and requested not in names:
        return None
    repeated = NoisyCircuit(block.qubits, (NoisyRepeat(block.body, 2),), dict(block.readout_error), block.source)
    for name in names if requested == "auto" else (requested,):
        engine = get_engine(name).brief()
        if engine.fits(repeated, metric) is None:
            if requested == "auto" and 2 * estimate_seconds(engine, block, metric) > MAX_SECONDS:
                return None  # too slow in closed form: the curve runs point by point on what auto picks
            check_time(block, metric, engine, runs=2, what="the depth curve (closed form)")
            return engine
    return None


def exact_if_fits(circuit: NoisyCircuit, metric: str) -> Engine | None:
    """The exact engine's brief variant when it fits ``circuit``, else None (depth curves switch
    to it where a first-order curve leaves its range)."""
    exact = get_engine("exact").brief()
    return exact if exact.fits(circuit, metric) is None else None


def next_engine(engine: Engine, circuit: NoisyCircuit, metric: str) -> Engine | None:
    """The next engine after ``engine`` in AUTO_ORDER that fits (brief variant), or None."""
    for other in _later(engine, circuit, metric):
        return other
    return None


def _later(engine: Engine, circuit: NoisyCircuit, metric: str):
    if engine.name not in AUTO_ORDER:
        return
    for name in AUTO_ORDER[AUTO_ORDER.index(engine.name) + 1:]:
        other = get_engine(name).brief()
        if other.fits(circuit, metric) is None:
            yield other


def quicker(first: Engine, circuit: NoisyCircuit, metric: str, seconds: float) -> tuple[Engine, str | None]:
    """``first``, or the next engine of AUTO_ORDER whose estimated run time is within ``seconds``
    (engines without an estimate count as quick); the quickest when none is. Returns the engine
    and a note when it is not ``first``. Engines without an estimate of their own are kept
    (the caller times their first run, :func:`next_engine`)."""
    if not estimates(first):
        return first, None
    first_time = estimate_seconds(first, circuit, metric)
    if first_time <= seconds:
        return first, None
    best, best_time = first, first_time
    for other in _later(first, circuit, metric):
        guess = estimate_seconds(other, circuit, metric) if estimates(other) else 0.0
        if guess < best_time:
            best, best_time = other, guess
        if guess <= seconds:
            break
    if best is first:
        return first, None
    return best, (f"one {first.name} run would take about {first_time:.2g} s, too slow for the loop; it used "
                  f"the {best.name} engine")
