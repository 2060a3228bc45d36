"""Choosing an engine (``auto``), the one place where refusals are worded, and family shares.

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
providing ``estimate_seconds(circuit, metric)``."""

from __future__ import annotations

from dataclasses import dataclass

from budget.engines.base import Engine, EngineResult
from budget.engines.base import DEFAULT_ESTIMATE_S
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


def estimate_seconds(engine: Engine, circuit: NoisyCircuit, metric: str) -> float:
    """The engine's own estimate, or DEFAULT_ESTIMATE_S when it gives none."""
    estimate = getattr(engine, "estimate_seconds", None)
    return DEFAULT_ESTIMATE_S if estimate is None else float(estimate(circuit, metric))


def _estimated(engine: Engine, t: float) -> str:
    return f" (estimated {_seconds(t)})" if hasattr(engine, "estimate_seconds") else ""


def _seconds(t: float) -> str:
    return f"{t:.2g} s" if t < 90 else f"{t / 60:.2g} min" if t < 5400 else f"{t / 3600:.2g} h"


def _size(circuit: NoisyCircuit, metric: str) -> str:
    return f"{circuit.source}: {circuit.num_qubits} qubits, {metric} metric"


def choose(circuit: NoisyCircuit, metric: str, name: str = "auto", *, brief: bool = False,
           order: tuple[str, ...] = AUTO_ORDER, options: dict | None = None) -> Choice:
    """The engine to run: ``name`` itself (checked to fit), or auto's choice among ``order``
    (see the module docstring); ``brief``: its :meth:`~budget.engines.base.Engine.brief` variant;
    ``options``: settings passed to the engine's ``configure`` when it has one (e.g.
    ``{"truncate": 1e-8}`` for the pauli engine), ignored by engines without it.

    Raises:
        InputError: unknown or unavailable engine name.
        TooLargeError: the named engine, or every engine of ``order``, cannot take the circuit
            (one line: size, limit, what would fit or what to change).
    """
    if metric in GATE_METRICS and circuit.has_mid_circuit:
        item = circuit.first_mid_circuit().item
        raise InputError(
            f"{place(circuit.source, item.line)}: {item_kind(item)} in the middle of the circuit: the {metric} "
            "metric needs a gate-only circuit; use --metric detectors or --metric record"
        )
    if name != "auto":
        if name not in ENGINE_NAMES:
            raise InputError(f"engine = {name!r}: expected auto or one of {', '.join(ENGINE_NAMES)}")
        engine = get_engine(name)
        reason = engine.fits(circuit, metric)
        if reason is not None:
            fitting = [c for c in order if c != name and get_engine(c).fits(circuit, metric) is None]
            hint = (f"; {' or '.join(fitting)} fits (or --engine auto)" if fitting
                    else _other_metric(circuit, metric, order))
            raise TooLargeError(f"{_size(circuit, metric)}: engine {name}: {reason}{hint}")
        t = estimate_seconds(engine, circuit, metric)
        return Choice(_configured(engine.brief() if brief else engine, options), f"{name}, as asked{_estimated(engine, t)}", t)
    fitting: list[tuple[str, Engine, float]] = []
    refused: dict[str, str] = {}
    for candidate in order:
        engine = get_engine(candidate)
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
        why += f"; {', '.join(more_accurate)} does not fit"
    else:
        why += ", the most accurate engine that fits"
    return Choice(_configured(engine.brief() if brief else engine, options), why, t)


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


def escalate(circuit: NoisyCircuit, metric: str, requested: str, outcome: EngineResult) -> Engine | None:
    """For ``auto``: the exact engine, when a first-order engine's result rests on a cancellation
    (``details["rests_on_cancellation"]``, budget/engines/orders.py) and the exact engine
    fits and is estimated within MAX_SECONDS; else None. The caller runs it and says so."""
    if requested != "auto" or outcome.engine == "exact" or not outcome.details.get("rests_on_cancellation"):
        return None
    exact = get_engine("exact")
    if exact.fits(circuit, metric) is not None or estimate_seconds(exact, circuit, metric) > MAX_SECONDS:
        return None
    return exact


def _configured(engine: Engine, options: dict | None) -> Engine:
    if options and hasattr(engine, "configure"):
        return engine.configure(**options)
    return engine


def first_order_shares(
    circuit: NoisyCircuit, metric: str, total: float, *, exclude: str
) -> tuple[dict[str, float], str | None]:
    """Family shares from a first-order engine, rescaled so they add up to ``total``.

    The split between families comes from the leading-order decomposition (coherent amplitudes
    per family, cross terms included); its overall size is set to the engine's actual value.
    Returns the shares and a note when no first-order engine fits or the one that fits is beyond
    its range (then no shares: a split of that engine would be a number outside its meaning);
    nothing to split (and no note) when ``total`` is zero.
    """
    if not total > 0:
        return {}, None
    for candidate in ("generators", "clifford"):
        if candidate == exclude:
            continue
        engine = get_engine(candidate)
        if engine.fits(circuit, metric) is not None:
            continue
        if estimate_seconds(engine, circuit, metric) > MAX_SECONDS:
            continue
        fo = engine.brief().run(circuit, metric)
        if fo.beyond_range is not None:
            return {}, (f"family shares left out: the {candidate} engine that splits the total is beyond its "
                        f"range here ({fo.beyond_range})")
        s = sum(fo.shares.values())
        if s > 0:
            return {k: v * total / s for k, v in fo.shares.items()}, None
        return dict(fo.shares), None
    return {}, "family shares unavailable: no first-order engine fits this circuit within the time limit"

# --- Keeping answers inside their engine's range (``auto`` only) ---------------------------------
# The first-order engines say when their approximation no longer holds (EngineResult.beyond_range).
# With ``auto`` such a result is not the answer: the other engines of AUTO_ORDER that fit (and are
# estimated to finish within MAX_SECONDS) are tried in turn and the first whose value is in range is
# used (after ``clifford``, the ``generators`` engine exponentiates the summed Hamiltonian, which
# stays accurate further, design.md §4). When none is in range the out-of-range result is kept and
# marked, so the views say plainly that the error is beyond the first-order range and by how much.


def run_in_range(circuit: NoisyCircuit, metric: str, chosen: Engine, requested: str, *,
                 observables: tuple[str, ...] = ()) -> tuple[EngineResult, tuple[str, ...]]:
    """Run ``chosen``; with ``requested == "auto"`` and a result beyond range, try the other engines.

    Returns the result used and notes saying which engine was left and why.
    """
    outcome = chosen.run(circuit, metric, observables=observables)
    if outcome.beyond_range is None or requested != "auto" or chosen.name not in AUTO_ORDER:
        return outcome, ()
    for name in (n for n in AUTO_ORDER if n != chosen.name):
        other = get_engine(name)
        if other.fits(circuit, metric) is not None or estimate_seconds(other, circuit, metric) > MAX_SECONDS:
            continue
        candidate = other.run(circuit, metric, observables=observables)
        if candidate.beyond_range is None:
            note = (f"the {chosen.name} engine is beyond its range here ({outcome.beyond_range}); "
                    f"auto used the {name} engine, which is within its range")
            return candidate, (note,)
    return outcome, ()
