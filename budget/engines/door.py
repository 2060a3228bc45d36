"""Choosing an engine: the registry, ``auto``'s order and estimates, and the one place where refusals are worded.

``auto`` weighs accuracy and estimated run time (design.md §4). AUTO_ORDER lists the engines from
the most accurate: ``exact`` (to rounding), ``clifford`` (first order, resummed; Clifford gates
only, any size), ``generators`` (first order, dense), ``pauli`` (first order, sparse Pauli
propagation, any size, with a stated truncation bound). Among the engines that fit (their
``fits``; the generators engine also steps aside from DENSE_SLOW_QUBITS qubits on when it would
hold dense 4^n matrices, where the pauli engine is faster), auto takes the most accurate one whose
estimated time (``estimate_seconds``, DEFAULT_ESTIMATE_S for an engine without one) is within
TIME_BUDGET_S; when none is, the fastest one, provided it is within MAX_SECONDS; otherwise it
refuses. :class:`Choice` keeps the engine and one line saying what was chosen and why. Every
refusal is one line (size, limit, what would fit or what to change); the engines' own ``fits``
reasons are short, and the limits are explained in docs/methods.md ("Engine reach").

A new engine takes part by being listed in AUTO_ORDER at its accuracy rank and, ideally, by
providing ``estimate_seconds(circuit, metric)``.

Nothing outside budget/engines/ picks an engine by name or order: the analysis layer calls
:func:`choose` (with ``needs=`` a capability of :data:`budget.engines.base.CAPABILITIES`, or
``repeats_folded=True`` for depth curves), :func:`choose_engine`, :func:`measured_engine`, and the
runs around the choice in :mod:`budget.engines.escalation` (the main job with its range and
cancellation checks, depth-curve sweeps, the closed loop's time plan)."""

from __future__ import annotations

from dataclasses import dataclass

from budget.engines.base import CAPABILITIES, DEFAULT_ESTIMATE_S, Engine
from budget.errors.noisy import NoisyCircuit
from budget.circuit.ir import item_kind
from budget.problems import InputError, TooLargeError, place
from budget.engines.clifford import CliffordEngine
from budget.engines.exact import ExactEngine
from budget.engines.generators import GeneratorsEngine
from budget.engines.pauli import PauliEngine


_REGISTRY = {
    "exact": ExactEngine,
    "generators": GeneratorsEngine,
    "clifford": CliffordEngine,
    "pauli": PauliEngine,
}
"""Every engine of the tool: name -> class."""

ENGINE_NAMES: tuple[str, ...] = tuple(_REGISTRY)


def get_engine(name: str) -> Engine:
    """The engine called ``name`` (one of :data:`ENGINE_NAMES`)."""
    if name not in _REGISTRY:
        raise ValueError(f"engine {name!r}: expected one of {', '.join(ENGINE_NAMES)} or auto")
    return _REGISTRY[name]()


AUTO_ORDER = ("exact", "clifford", "generators", "pauli")
GATE_METRICS = ("process", "state")
"""Metrics defined for gate-only circuits: a measurement, reset or if item is refused for them
(whatever engine an extension registers, not only through each engine's ``fits``)."""
DENSE_SLOW_QUBITS = 8
"""From this many qubits, ``auto`` prefers the pauli engine (default truncation) to the generators
engine whenever the latter would hold dense 4^n matrices (process metric or repeated blocks): on the
10-qubit public circuits 0.5 s and 3.6 s against 142 s and 381 s wall (docs/benchmarks.md,
"Pauli"; untruncated, the pauli engine is the slower one at 10 qubits)."""


def _dense_is_slower(name: str, circuit: NoisyCircuit, metric: str) -> str | None:
    if name != "generators" or circuit.num_qubits < DENSE_SLOW_QUBITS:
        return None
    if metric == "process" or circuit.has_repeats:
        return (f"{circuit.num_qubits} qubits: dense 2^n x 2^n matrices would be slower than the pauli engine "
                f"(from {DENSE_SLOW_QUBITS} qubits on)")
    return None


TIME_BUDGET_S = 10.0
"""auto takes the most accurate engine estimated to finish within this time."""
MAX_SECONDS = 60.0
"""auto refuses when even the fastest engine that fits is estimated above this (the goal: every
accepted circuit answered or refused within a minute on the development machine)."""
DOCS = "docs/methods.md (engine reach)"


@dataclass(frozen=True)
class Choice:
    """The engine to run and why, in one line (``reason``; shown in the terminal and the JSON)."""

    engine: Engine
    reason: str
    estimate_s: float


def estimates(engine: Engine) -> bool:
    """Whether ``engine`` estimates its run time: its declared capability; an object written to
    the earlier duck-typed protocol (not an :class:`Engine`) by having the method."""
    if isinstance(engine, Engine):
        return engine.supports("estimate_seconds")
    return callable(getattr(engine, "estimate_seconds", None))


def estimate_seconds(engine: Engine, circuit: NoisyCircuit, metric: str) -> float:
    """The engine's own estimate, or DEFAULT_ESTIMATE_S when it gives none."""
    if not estimates(engine):
        return DEFAULT_ESTIMATE_S
    return float(engine.estimate_seconds(circuit, metric))


def _estimated(engine: Engine, t: float) -> str:
    return f" (estimated {_seconds(t)})" if estimates(engine) else ""


def engine_order(needs: str | None, repeats_folded: bool) -> tuple[str, ...]:
    """AUTO_ORDER restricted to the engines with capability ``needs``; with ``repeats_folded``
    (depth curves), the engines whose cost does not grow with the repeat count come first and the
    others (pauli: cycle by cycle, with an early stop) after them, for circuits nothing else holds."""
    out = [name for name in AUTO_ORDER if needs is None or get_engine(name).supports(needs)]
    if repeats_folded:
        out.sort(key=lambda name: not get_engine(name).folds_repeats)  # stable: accuracy order kept
    return tuple(out)


def _seconds(t: float) -> str:
    return f"{t:.2g} s" if t < 90 else f"{t / 60:.2g} min" if t < 5400 else f"{t / 3600:.2g} h"


def _size(circuit: NoisyCircuit, metric: str) -> str:
    return f"{circuit.source}: {circuit.num_qubits} qubits, {metric} metric"


def choose(circuit: NoisyCircuit, metric: str, name: str = "auto", *, brief: bool = False,
           needs: str | None = None, repeats_folded: bool = False, options: dict | None = None) -> Choice:
    """The engine to run: ``name`` itself (checked to fit), or auto's choice among the engines of
    AUTO_ORDER that have the capability ``needs`` (and, with ``repeats_folded``, fold repeats;
    see the module docstring); ``brief``: its :meth:`~budget.engines.base.Engine.brief` variant
    (estimated as such); ``options``: settings passed to the engine's ``configure`` (e.g.
    ``{"truncate": 1e-8}`` for the pauli engine; engines ignore settings they lack).

    Raises:
        InputError: unknown engine name, or a named engine without the capability ``needs``.
        TooLargeError: the named engine, or every engine of the order, cannot take the circuit
            (one line: size, limit, what would fit or what to change).
    """
    order = engine_order(needs, repeats_folded)
    if metric in GATE_METRICS and circuit.has_mid_circuit:
        item = circuit.first_mid_circuit().item
        raise InputError(
            f"{place(circuit.source, item.line)}: {item_kind(item)}: the {metric} metric needs gates only (measurements "
            "at the very end are fine; no reset, mid-circuit measurement or if); use --metric detectors or --metric record"
        )
    if name != "auto":
        if name not in ENGINE_NAMES:
            raise InputError(f"engine = {name!r}: expected auto or one of {', '.join(ENGINE_NAMES)}")
        engine = get_engine(name)
        if needs is not None and not engine.supports(needs):
            raise InputError(f"engine = {name!r}: {CAPABILITIES[needs]} come from {', '.join(order)} (or auto)")
        engine = engine.brief() if brief else engine
        reason = engine.fits(circuit, metric)
        if reason is not None:
            fitting = [c for c in order if c != name and get_engine(c).fits(circuit, metric) is None]
            hint = (f"; {' or '.join(fitting)} fits (or --engine auto)" if fitting
                    else _other_metric(circuit, metric, order))
            raise TooLargeError(f"{_size(circuit, metric)}: engine {name}: {reason}{hint}")
        t = estimate_seconds(engine, circuit, metric)
        return Choice(engine.configure(**options) if options else engine, f"{name}, as asked{_estimated(engine, t)}", t)
    fitting: list[tuple[str, Engine, float]] = []
    refused: dict[str, str] = {}
    for candidate in order:
        engine = get_engine(candidate).brief() if brief else get_engine(candidate)
        reason = engine.fits(circuit, metric) or _dense_is_slower(candidate, circuit, metric)
        if reason is None:
            fitting.append((candidate, engine, estimate_seconds(engine, circuit, metric)))
        else:
            refused[candidate] = reason
    if not fitting:
        why = "; ".join(f"{k}: {v}" for k, v in refused.items()) or "none installed"
        raise TooLargeError(f"{_size(circuit, metric)}: no engine fits ({why}){_other_metric(circuit, metric, order)}")
    best = fitting[0]
    skipped = []
    for cand in fitting:
        if cand[2] <= TIME_BUDGET_S:
            best = cand
            break
        skipped.append(cand)
    else:
        best = min(fitting, key=lambda c: c[2])
        skipped = [c for c in fitting if c is not best and order.index(c[0]) < order.index(best[0])]
        if best[2] > MAX_SECONDS:
            raise TooLargeError(
                f"{_size(circuit, metric)}: the fastest engine that fits ({best[0]}) would take about "
                f"{_seconds(best[2])}, over the {MAX_SECONDS:.0f} s limit of auto; name it with --engine to run "
                "it anyway, or analyse fewer qubits"
            )
    name_, engine, t = best
    more_accurate = [c for c in order[: order.index(name_)] if c in refused] + [c[0] for c in skipped]
    why = f"auto chose {name_}{_estimated(engine, t)}"
    if skipped:
        why += "; " + ", ".join(f"{c[0]} would take about {_seconds(c[2])}" for c in skipped)
        why += f" (budget {TIME_BUDGET_S:.0f} s)"
    elif more_accurate:
        why += f"; {', '.join(more_accurate)} {'does' if len(more_accurate) == 1 else 'do'} not fit"
    else:
        why += ", the most accurate engine that fits"
    return Choice(engine.configure(**options) if options else engine, why, t)


def _other_metric(circuit: NoisyCircuit, metric: str, order: tuple[str, ...]) -> str:
    """What to change, for a refusal: the other metric when an engine fits it, else the docs."""
    other = "state" if metric == "process" else "process"
    if any(get_engine(c).fits(circuit, other) is None for c in order):
        return f"; the {other} metric fits (--metric {other})"
    return f"; see {DOCS}"


def check_time(circuit: NoisyCircuit, metric: str, engine: Engine, *, runs: int, what: str) -> None:
    """Refuse (one line) work of ``runs`` runs of ``engine`` on ``circuit`` estimated above
    MAX_SECONDS, for callers that run an engine several times (``what``: e.g. "the depth curves")."""
    t = runs * estimate_seconds(engine, circuit, metric)
    if t > MAX_SECONDS:
        raise TooLargeError(
            f"{_size(circuit, metric)}: {what} would take about {_seconds(t)} with the {engine.name} engine, over "
            f"the {MAX_SECONDS:.0f} s limit{_other_metric(circuit, metric, AUTO_ORDER).replace(' fits (', ' may be faster (')}"
        )


def choose_engine(circuit: NoisyCircuit, metric: str, name: str = "auto", *, brief: bool = False,
                  options: dict | None = None) -> Engine:
    """The engine :func:`choose` picks (callers that need no reason)."""
    return choose(circuit, metric, name, brief=brief, options=options).engine


# --- Circuits with mid-circuit measurement (``detectors`` and ``record`` metrics) ------------------
MEASURED_ORDER = ("exact", "clifford")
"""Engines of the measured metrics, most accurate first: the exact engine's branches over recorded
bits (budget/engines/exact/branches.py) and the clifford engine's Pauli frames
(budget/engines/clifford/frames.py); the record metric has only the first."""


def measured_engine(metric: str, requested: str, exact_reason: str | None, *, what: str | None = None) -> str:
    """``"exact"`` or ``"clifford"`` for a measured metric: the named one, or under ``auto`` the exact
    engine when it fits (``exact_reason`` is None), else the clifford engine. ``what``: the thing
    computed, for the refusal wording (default: the metric).

    Raises:
        InputError: an engine that does not compute the measured metrics (or the clifford engine
            for the record metric).
        TooLargeError: the exact engine, named, does not fit (the line says what would).
    """
    names = MEASURED_ORDER if metric != "record" else MEASURED_ORDER[:1]
    subject = what or f"the {metric} metric"
    if requested != "auto" and requested not in names:
        if metric == "record":
            raise InputError(f"engine = {requested!r}: the record metric runs on the exact engine")
        raise InputError(f"engine = {requested!r}: {subject} runs on the {' or '.join(names)} engine")
    if requested == "exact" and exact_reason is not None and metric != "record":
        raise TooLargeError(f"engine exact: {exact_reason}; the clifford engine fits (first order)")
    if requested == "exact" or (requested == "auto" and exact_reason is None):
        return "exact"
    return names[-1]
