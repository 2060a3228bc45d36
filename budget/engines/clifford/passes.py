"""The walks of one clifford-engine run: the first-order pass, and the second-order pass with the
decision to form it (budget/engines/clifford/second.py) and the warnings it leads to.

A pass walks the circuit once (budget/engines/frame/walk.py) with a sink that groups the error
terms (budget/engines/frame/sinks.py); the second order adds the commutator terms of the effective
generator, within each repetition for blocks folded by orbits.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from budget.engines.clifford.observables import merge_terms
from budget.engines.clifford.settings import Settings
from budget.engines.clifford.second import PAIR_BUDGET, SecondOrderSink, TooCostly, repetition_second_order
from budget.engines.details import Validity
from budget.engines.frame.groups import Budget, aggregate
from budget.engines.frame.pauli_frame import num_words
from budget.engines.frame.sinks import GroupSink
from budget.engines.frame.terms import Sources, TermBuilder
from budget.engines.frame.walk import Walker
from budget.engines.orders import cancellation_note, second_order_share, term_norm_sum, term_square_sum, validity_details
from budget.errors.noisy import NoisyCircuit


CHEAP_PAIRS = 3e7
"""(terms walked)² x words below which the second order is always formed."""

ORBIT_SECOND = (
    "second order of blocks folded by orbits: within each repetition only (the commutators between "
    "repetitions and with the layers around the block are left out)"
)


def walk(engine: Settings, circuit: NoisyCircuit, metric: str, plans: dict, *, grouping=None, labels=(), second: bool = False,
         orbits: bool = False):
    """One walk; ``second``: also the second-order terms (period folds; raises TooCostly beyond
    the pair budget); with ``orbits`` (the first walk folded a block by orbits) the blocks
    folded by orbits get the second-order terms within each repetition instead
    (:func:`budget.engines.clifford.second.repetition_second_order`)."""
    sources = Sources(labels={lab: i for i, lab in enumerate(labels)})
    builder = TermBuilder(circuit.num_qubits, circuit.qubits, sources, grouping)
    sink = GroupSink(builder, key="x" if metric == "state" else "xz", unit=grouping is not None)
    direction = "pull" if metric == "state" else "push"
    words = num_words(circuit.num_qubits)
    if second and orbits:
        walker = Walker(
            circuit.num_qubits,
            direction,
            sink,
            max_unrolled=engine.max_unrolled,
            plans=plans,
            orbit_baby=engine.orbit_baby,
            cycle_terms=lambda parts: repetition_second_order(parts, direction, words),
        )
        walker.run(circuit.body)
        return sources, sink, walker
    outer = SecondOrderSink(sink, direction, words) if second else sink
    walker = Walker(
        circuit.num_qubits,
        direction,
        outer,
        max_unrolled=engine.max_unrolled,
        plans=plans,
        orbit_baby=0 if second else engine.orbit_baby,
    )
    walker.run(circuit.body)
    if second:
        sink.rows = outer.finish()  # full rows of the first- and second-order terms
        if outer.too_costly:
            raise TooCostly
        if outer.unfolded:
            walker.warnings.append(
                "second order: a block without a period within the walked range was folded "
                "approximately, so its commutator terms are not complete"
            )
    return sources, sink, walker


def wants_second(engine: Settings, circuit: NoisyCircuit, budget: Budget, sink: GroupSink, walker: Walker) -> str | None:
    """None to form the second order (it is cheap, or the first order looks cancelled: its
    coherent sum is below a tenth of what the terms would give landing apart), else why not.
    Blocks folded by orbits or approximately are not folded at second order."""
    if not engine.second_order:
        return "not asked for"
    cancelled = budget.coherent < 0.1 * term_square_sum(circuit)
    if walker.warnings:
        return "not formed (a block was folded approximately; the second order needs a period or orbit fold)" + (
            "!" if cancelled else ""
        )
    if sink.terms_emitted**2 * num_words(circuit.num_qubits) <= CHEAP_PAIRS or cancelled:
        return None
    return "not formed (costly, and the first order shows no cancellation)"


def hidden_note(sink: GroupSink, budget: Budget, cancellation: float) -> str | None:
    """State metric: a warning when the first order cancels and the second-order generator
    barely acts on |0…0> (its state infidelity is below 1 % of its process-type size
    Σ_P c_P²): the state value then comes from the third order, which is left out."""
    if cancellation >= 0.1:
        return None
    first, second = sink.rows
    merged = merge_terms(*(np.concatenate([first[i], second[i]]) for i in range(4)))
    size = float(np.sum(merged[3] ** 2))
    if size == 0.0 or budget.coherent >= 0.01 * size:
        return None
    return (
        f"state metric: the first-order error terms cancel and the second-order term leaves the input "
        f"state almost unchanged (state infidelity {budget.coherent:.2g} against {size:.2g} for the process "
        "metric), so the state value comes from the third order, which the clifford engine leaves out: "
        "use the generators or exact engine where they fit"
    )


def second_order(engine: Settings, circuit: NoisyCircuit, metric: str, plans: dict, budget: Budget, sources: Sources,
                 sink: GroupSink, walker: Walker) -> tuple[Budget, Budget, Sources, Walker, Validity, list[str]]:
    """The second-order pass after the first-order one (``budget``, ``sources``, ``sink``,
    ``walker``) when :func:`wants_second` says so: (budget, first-order budget, sources, walker,
    validity record, warnings) of the pass that gives the value."""
    validity, warnings = Validity(), []
    first = budget
    why_not = wants_second(engine, circuit, budget, sink, walker)
    if why_not is None:
        try:
            sources, sink2, walker = walk(engine, circuit, metric, plans, second=True, orbits=bool(walker.orbit_records))
        except TooCostly:
            sink2 = None
            validity = replace(validity, second_order=f"not formed (more than {PAIR_BUDGET:.0e} pair operations)")
            if budget.coherent < 0.1 * term_square_sum(circuit):
                warnings.append(
                    "the first-order error terms largely cancel and their second-order (commutator) "
                    "terms were too many to form: the result may be far too small"
                )
        if sink2 is not None:
            first = budget
            budget = aggregate(sink2, len(sources.families), state=metric == "state")
            share = second_order_share(budget.coherent_resummed, first.coherent_resummed)
            sizes = term_norm_sum(circuit)
            cancellation = float(np.sqrt(first.coherent)) / sizes if sizes > 0 else 1.0
            validity = replace(validity_details(share, cancellation, float(np.sqrt(first.coherent)), None),
                               second_order=validity.second_order,
                               coherent_without_second_order=first.coherent_resummed + 0.0)
            if note := cancellation_note(share, cancellation, engine=engine.name):
                warnings.append(note)
            if metric == "state" and (note := hidden_note(sink2, budget, cancellation)):
                warnings.append(note)
                validity = replace(validity, rests_on_cancellation=True)
            if walker.orbit_records:
                validity = replace(validity, second_order=ORBIT_SECOND + "".join(f"; {n}" for n in walker.cycle_notes))
                if cancellation < 0.1:
                    warnings.append(f"the first-order error terms largely cancel and {ORBIT_SECOND}: the result may be too small")
    elif engine.second_order:
        validity = replace(validity, second_order=why_not.rstrip("!"))
        if why_not.endswith("!"):
            warnings.append(
                "the first-order error terms largely cancel, but the second-order (commutator) terms "
                "are not formed for blocks folded by orbits or approximately: the result may be far "
                "too small (CliffordEngine(orbit_baby=0) folds by the period instead)"
            )
    return budget, first, sources, walker, validity, warnings
