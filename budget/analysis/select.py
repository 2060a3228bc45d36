"""Choosing an engine (``auto``) and splitting an engine's total into family shares.

``auto`` picks the most accurate engine that fits (design.md §4): ``exact`` when the dense
simulation fits, else ``clifford`` when every ideal gate is Clifford (exact to first order, any
size), else ``generators``. The result names the engine that ran.
"""

from __future__ import annotations

from budget.engines import ENGINE_NAMES, Engine, EngineResult, get_engine
from budget.errors.noisy import NoisyCircuit
from budget.circuit.ir import item_kind
from budget.problems import InputError, TooLargeError, place

AUTO_ORDER = ("exact", "clifford", "generators")
GATE_METRICS = ("process", "state")
"""Metrics defined for gate-only circuits: a measurement, reset or if item is refused for them
(whatever engine an extension registers, not only through each engine's ``fits``)."""


def _available(name: str) -> Engine | None:
    try:
        return get_engine(name)
    except ImportError:
        return None


def choose_engine(circuit: NoisyCircuit, metric: str, name: str = "auto", *, brief: bool = False) -> Engine:
    """The engine to run: ``name`` itself (checked to fit), or the first of AUTO_ORDER that fits;
    ``brief``: its :meth:`~budget.engines.base.Engine.brief` variant, for callers that read only
    the totals and shares.

    Raises:
        TooLargeError: the named engine (or every engine) cannot hold the circuit; the message
            says why and which engine would fit.
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
        engine = _available(name)
        if engine is None:
            raise InputError(f"engine = {name!r}: not available in this installation")
        reason = engine.fits(circuit, metric)
        if reason is not None:
            raise TooLargeError(f"engine {name}: {reason}")
        return engine.brief() if brief else engine
    reasons = []
    for candidate in AUTO_ORDER:
        engine = _available(candidate)
        if engine is None:
            continue
        reason = engine.fits(circuit, metric)
        if reason is None:
            return engine.brief() if brief else engine
        reasons.append(f"{candidate}: {reason}")
    raise TooLargeError(
        f"{circuit.source}: no engine fits this {circuit.num_qubits}-qubit circuit for the "
        f"{metric} metric ({'; '.join(reasons)})"
    )


def escalate(circuit: NoisyCircuit, metric: str, requested: str, outcome: EngineResult) -> Engine | None:
    """For ``auto``: the exact engine, when a first-order engine's result rests on a cancellation
    (``details["rests_on_cancellation"]``, budget/engines/_validity.py) and the exact engine
    fits; else None. The caller runs it and says so."""
    if requested != "auto" or outcome.engine == "exact" or not outcome.details.get("rests_on_cancellation"):
        return None
    exact = _available("exact")
    return exact if exact is not None and exact.fits(circuit, metric) is None else None


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
        engine = _available(candidate)
        if engine is None or engine.fits(circuit, metric) is not None:
            continue
        fo = engine.brief().run(circuit, metric)
        if fo.beyond_range is not None:
            return {}, (f"family shares left out: the {candidate} engine that splits the total is beyond its "
                        f"range here ({fo.beyond_range})")
        s = sum(fo.shares.values())
        if s > 0:
            return {k: v * total / s for k, v in fo.shares.items()}, None
        return dict(fo.shares), None
    return {}, "family shares unavailable: no first-order engine fits this circuit"
