"""The records of a clifford-engine run besides its number: the first-order parts, the folding
of repeated blocks, the drill-down by family and operation, and the per-qubit map of where the
error lands (budget/engines/details.py)."""

from __future__ import annotations

import numpy as np

from budget.engines.clifford.settings import Settings
from budget.engines.details import Details, Drilldown, FoldedBlock, Folding, OperationShare, Parts, QubitMap
from budget.engines.frame.groups import Budget
from budget.engines.frame.sinks import LandingSink
from budget.engines.frame.terms import Sources, TermBuilder
from budget.engines.frame.walk import Walker
from budget.errors.noisy import NoisyCircuit

LANDING_BUDGET = 1e10
"""Largest (error terms walked) x (qubits) for which the per-qubit map is computed by default
(about 15 s of CPU at the 1,024-qubit, 100-cycle benchmark, which costs 4·10^9)."""


def first_order_details(b: Budget, sources: Sources, walker: Walker, top: int, final: Budget) -> Details:
    """Records of the first-order pass ``b`` (the exponentiated and leading-order coherent parts
    from ``final``, the pass with the second order where it was formed)."""
    shares = b.first_order_shares
    order = np.argsort(-np.abs(shares))[:top]
    blocks: dict[tuple, int] = {}
    for count, period in walker.periods:
        blocks[(count, period)] = blocks.get((count, period), 0) + 1
    return Details(
        parts=Parts(coherent_first_order=b.coherent, coherent_exponentiated=final.coherent_resummed + 0.0,
                    coherent_leading_order=final.coherent, stochastic_first_order=b.stochastic,
                    coherent_groups=b.groups, max_group_amplitude_rad=b.max_amplitude),
        folding=Folding(folded_blocks=tuple(FoldedBlock(c, p, w) for (c, p), w in blocks.items()),
                        layers_walked=walker.layers_walked, orbit_folds=tuple(walker.orbit_records)),
        drilldown=Drilldown(
            first_order_family_shares=by_family(sources, shares),
            top_operations=tuple(OperationShare(sources.info[i]["family"], sources.info[i]["gate"],
                                                tuple(sources.info[i]["qubits"]), sources.info[i]["line"],
                                                float(shares[i])) for i in order if shares[i]),
        ),
    )


def by_family(sources: Sources, shares: np.ndarray) -> dict[str, float]:
    out: dict[str, float] = {}
    for f, v in zip(sources.families, shares):
        out[f] = out.get(f, 0.0) + float(v)
    return out


def landing_map(engine: Settings, circuit: NoisyCircuit, cost: float, builder: TermBuilder, plans: dict) -> QubitMap:
    if not engine.qubit_map:
        return QubitMap()
    if engine.qubit_map != "always" and cost > LANDING_BUDGET:
        return QubitMap(
            qubit_map_skipped=f"it needs about {cost:.2g} bit operations (default limit {LANDING_BUDGET:.2g}; "
            "from Python, CliffordEngine(qubit_map='always') computes it)"
        )
    sink = LandingSink(builder)
    Walker(circuit.num_qubits, "push", sink, max_unrolled=engine.max_unrolled, plans=plans).run(circuit.body)
    land = sink.landing(circuit.num_qubits)
    return QubitMap(
        qubit_map={name: float(v) for name, v in zip(circuit.qubits, land)},
        qubit_map_quantity="first-order marginal process infidelity per qubit at the output",
    )
