"""The ``clifford`` engine: first-order error budgets of Clifford circuits of any size.

When every ideal gate is Clifford, a Pauli error stays a Pauli string when pushed through the rest
of the circuit (Gottesman, arXiv:quant-ph/9807006 (1998)), so the generator picture of design.md §4
(Blume-Kohout et al., "A taxonomy of small Markovian errors", PRX Quantum 3, 020335 (2022)) needs
no matrices: each operation's coherent part is its exact Pauli Hamiltonian Σ h_P P, its incoherent
part stochastic Pauli rates (depolarizing λ -> λ/d² per Pauli; T1/T2 through the Pauli twirl of
Tomita & Svore, Phys. Rev. A 90, 062320 (2014)). Every term is mapped to the output frame
(process metric) or back to the input frame (state metric, observables) by a running tableau kept
as packed bits (:mod:`budget.engines.frame.pauli_frame`), and amplitudes add within a group:

    process:  e_F ≈ Σ_Q (Σ_{t→Q} h_t s_t)² + Σ_t p_t
    state:    1 - F ≈ Σ_{x≠0} |Σ_{t→x} h_t i^{e_t}|² + Σ_{t: x_t≠0} p_t

(the state sum is Var_{0…0}(H_in) written per X part). Repeated blocks are folded by the period of
their Clifford (:mod:`budget.engines.frame.walk`); observables use only their backward light cone
(:mod:`budget.engines.clifford.cone`). As in the generators engine, the reported infidelity is the
resummed coherent part 1 - Π cos²|A_g| plus the first-order stochastic part, and the family shares
(coherent shares scaled by resummed / first order) add up to it (:mod:`budget.engines.frame.groups`);
``first_order`` is the sum above, ``details["first_order_family_shares"]`` its split.

This module keeps the run's order of steps; the steps live beside it: the first- and second-order
passes (:mod:`budget.engines.clifford.passes`), the coherent part to all orders on small supports
(:mod:`budget.engines.clifford.allorders`), the observable walks
(:mod:`budget.engines.clifford.observables`) and the records besides the number, the per-qubit map
included (:mod:`budget.engines.clifford.records`).
"""

from __future__ import annotations

import numpy as np

from budget.circuit.clifford_check import first_non_clifford
from budget.engines.base import METRICS, Engine, EngineResult, Metric, QuadraticForm, parse_observable, zero_result
from budget.engines.clifford.allorders import all_orders, loss_map
from budget.engines.clifford.observables import observable_errors
from budget.engines.clifford.passes import second_order, walk
from budget.engines.clifford.records import by_family, first_order_details, landing_map
from budget.engines.frame.groups import aggregate, quadratic_matrix
from budget.engines.frame.walk import MAX_UNROLLED, ORBIT_BABY
from budget.errors.knobs import knob_grouping
from budget.errors.noisy import NoisyCircuit
from budget.memo import distinct
from budget.problems import InputError, TooLargeError

SMALL = 0.1
"""First-order infidelity above which the engine warns that the expansion is no longer small."""
TWIRL_NOTE = (
    "state metric: T1/T2 relaxation enters through its Pauli twirl (Tomita & Svore, PRA 90, 062320 "
    "(2014)); amplitude damping leaves |0> alone while its twirl does not, so the relaxation part is "
    "approximate (use the generators or exact engine for jump operators)"
)


def _has_relaxation(circuit: NoisyCircuit) -> bool:
    return any(
        not r.is_trivial
        for layer in circuit.distinct_layers()
        for r in (*layer.idle, *(r for nop in layer.sites for r in nop.relaxation))
    )


class CliffordEngine(Engine):
    """Pauli-frame engine (see module docstring).

    Args:
        max_unrolled: repetitions of a block walked while looking for its period.
        qubit_map: the per-qubit map of where the error lands (output frame): True computes it when
            it costs at most LANDING_BUDGET bit operations (terms walked x qubits), ``"always"``
            always, False never.
        top: number of operations listed in the drill-down.
        prune_observables: evaluate observables on their backward light cone only.
        orbit_baby: baby steps of the orbit fold of long-period blocks (process metric; see
            budget/engines/frame/orbits.py); 0 folds every block by its period instead.
        second_order: add the second-order (commutator) terms of the effective generator
            (budget/engines/clifford/second.py) when affordable or when the first order looks cancelled.
    """

    name = "clifford"
    capabilities = frozenset({"observables", "quadratic_form"})

    def __init__(
        self,
        *,
        max_unrolled: int = MAX_UNROLLED,
        qubit_map: bool | str = True,
        top: int = 10,
        prune_observables: bool = True,
        orbit_baby: int = ORBIT_BABY,
        second_order: bool = True,
    ):
        self.second_order = second_order
        self.max_unrolled = max_unrolled
        self.qubit_map = qubit_map
        self.top = top
        self.prune_observables = prune_observables
        self.orbit_baby = orbit_baby

    def fits(self, circuit: NoisyCircuit, metric: Metric) -> str | None:
        """None when every ideal gate is Clifford, else the first offending gate and its line."""
        if metric not in METRICS:
            return f"metric {metric!r} is not one of {', '.join(METRICS)}"
        if circuit.has_mid_circuit:
            return circuit.mid_circuit_reason()
        op = first_non_clifford(nop.op for nop in distinct(n for layer in circuit.distinct_layers() for n in layer.operations))
        if op is None:
            return None
        angles = f"({', '.join(f'{a:.6g}' for a in op.params)})" if op.params else ""
        names = ", ".join(circuit.qubits[q] for q in op.qubits)
        where = f"line {op.line}: " if op.line is not None else ""
        return f"{where}{op.label or op.gate}{angles} on {names} is not Clifford"

    def brief(self) -> "CliffordEngine":
        """The same engine without the per-qubit map (often the costliest part of a run)."""
        return CliffordEngine(
            max_unrolled=self.max_unrolled,
            qubit_map=False,
            top=self.top,
            prune_observables=self.prune_observables,
            orbit_baby=self.orbit_baby,
            second_order=self.second_order,
        )

    def _check(self, circuit: NoisyCircuit, metric: Metric) -> None:
        reason = self.fits(circuit, metric)
        if reason is not None:
            raise TooLargeError(f"{circuit.source}: engine clifford: {reason}")

    def run(self, circuit: NoisyCircuit, metric: Metric, *, observables: tuple[str, ...] = ()) -> EngineResult:
        """First-order and resummed infidelity, family shares, drill-down, qubit map, observables."""
        self._check(circuit, metric)
        if not circuit.has_errors:
            try:
                for label in observables:
                    parse_observable(label, circuit.num_qubits)
            except ValueError as err:
                raise InputError(f"{circuit.source}: {err}") from None
            return zero_result(self.name, metric, tuple(observables))
        plans: dict = {}
        sources, sink, walker = walk(self, circuit, metric, plans)
        budget = aggregate(sink, len(sources.families), state=metric == "state")
        first_walk, first_sources = (sink, walker), sources
        budget, first, sources, walker, validity, warnings = second_order(self, circuit, metric, plans, budget, sources,
                                                                          sink, walker)
        losses: list = []  # (qubits, infidelity) of each error component, when every order was summed
        if self.second_order and not walker.orbit_records:
            budget, losses, validity = all_orders(self, circuit, metric, plans, budget, first_walk[0], validity, warnings)
        warnings += list(walker.warnings)
        fo, total = first.first_order, budget.total
        shares = by_family(sources, budget.shares)
        beyond = None
        raw = budget.coherent_resummed + budget.stochastic
        if raw > 1.0:  # the resummed coherent part plus the incoherent sum is no probability any more
            beyond = (f"resummed coherent part {budget.coherent_resummed:.3g} plus the first-order sum of incoherent "
                      f"errors {budget.stochastic:.3g} make {raw:.3g}, {raw:.3g}x the largest possible infidelity")
        if fo > SMALL or budget.max_amplitude > np.sqrt(SMALL):
            warnings.append(
                f"first-order infidelity {fo:.3g} is no longer small (largest summed coherent amplitude "
                f"{budget.max_amplitude:.3g} rad): the resummed value {total:.3g} treats error groups as "
                "independent; check with the exact engine where it fits"
            )
        if metric == "state" and _has_relaxation(circuit):
            warnings.append(TWIRL_NOTE)
        details = first_order_details(first, first_sources, walker, self.top, budget).with_records(validity)
        sink, walker = first_walk
        emitted = sink.terms_emitted + sink.rates_emitted
        for rec in walker.orbit_records:  # the landing walk enumerates what the orbit search skipped
            walks = min(rec["count"], rec["longest_orbit"] or self.max_unrolled)
            emitted += rec["terms_per_repetition"] * max(0, walks - rec["baby_steps"])
        cost = emitted * circuit.num_qubits
        qubit_map = landing_map(self, circuit, cost, sink.builder, plans)
        if qubit_map.qubit_map is not None and metric == "process" and validity.rests_on_cancellation and losses:
            qubit_map = loss_map(circuit, losses)
        details = details.with_records(qubit_map)
        obs = self.observable_errors(circuit, tuple(observables), _plans=plans) if observables else {}
        if observables and _has_relaxation(circuit):
            warnings.append("observables: T1/T2 relaxation enters through its Pauli twirl (first order)")
        return EngineResult(
            engine=self.name,
            metric=metric,
            infidelity=float(min(max(total, 0.0), 1.0)),
            shares=shares,
            first_order=float(fo),
            warnings=tuple(dict.fromkeys(warnings)),
            details=details,
            observable_errors=obs,
            beyond_range=beyond,
        )

    def observable_error(self, circuit: NoisyCircuit, label: str, *, prune: bool | None = None) -> float:
        """First-order change <O>_actual - <O>_ideal of the Pauli observable ``label``."""
        return self.observable_errors(circuit, (label,), prune=prune)[label]

    def observable_errors(
        self, circuit: NoisyCircuit, labels: tuple[str, ...], *, prune: bool | None = None, _plans: dict | None = None
    ) -> dict[str, float]:
        """First-order change of <O> for each Pauli observable (``"Z0Z1"``, ``"X3 Y4"``):
        :func:`budget.engines.clifford.observables.observable_errors`."""
        return observable_errors(self, circuit, labels, prune=prune, _plans=_plans)

    def quadratic_form(self, circuit: NoisyCircuit, metric: Metric) -> QuadraticForm:
        """e ≈ δᵀ A δ + floor over (family, knob) labels, from the knobs' first-order generators.

        Labels and values as in :func:`budget.errors.knobs.knob_grouping` (shared with the
        generators engine): δ is the knob value of largest magnitude in the family, each operation
        enters scaled by its value / δ, and operations with a Hamiltonian but no knobs form the
        knob ``"pauli"`` with δ = 1. A_ab = Σ_g Re(conj(B_ga) B_gb) over the groups of
        propagated unit generators; the floor is the first-order stochastic infidelity.
        """
        self._check(circuit, metric)
        grouping, values = knob_grouping(circuit)
        labels = tuple(values)
        sources, sink, _ = walk(self, circuit, metric, {}, grouping=grouping, labels=labels)
        a = quadratic_matrix(sink, len(labels), state=metric == "state")
        floor = by_family(sources, sink.stochastic_by_source(len(sources.families)))
        return QuadraticForm(
            labels, a, np.array([values[lab] for lab in labels], dtype=float), float(sum(floor.values())), floor
        )


__all__ = ["CliffordEngine"]
