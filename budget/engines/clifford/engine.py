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
"""

from __future__ import annotations

import dataclasses
from dataclasses import replace

import numpy as np

from budget.circuit.clifford_check import first_non_clifford
from budget.engines.frame.groups import Budget, aggregate, quadratic_matrix
from budget.engines.frame.pauli_frame import num_words
from budget.engines.clifford.observables import merge_terms, observable_change
from budget.engines.clifford.allorders import MAX_SUPPORT_QUBITS, AllOrdersSink, OutOfReach
from budget.engines.clifford.second import PAIR_BUDGET, SecondOrderSink, TooCostly, repetition_second_order
from budget.engines.frame.sinks import GroupSink, LandingSink, ObservableSink
from budget.engines.frame.terms import Sources, TermBuilder
from budget.engines.orders import (
    SECOND_ORDER_SHARE,
    cancellation_note,
    second_order_share,
    term_norm_sum,
    term_square_sum,
    validity_details,
)
from budget.engines.frame.walk import MAX_UNROLLED, ORBIT_BABY, Walker
from budget.engines.base import METRICS, Engine, EngineResult, Metric, QuadraticForm, parse_observable, zero_result
from budget.engines.details import Details, Drilldown, FoldedBlock, Folding, OperationShare, Parts, QubitMap, Validity
from budget.errors.knobs import knob_grouping
from budget.errors.light_cone import light_cone_circuit
from budget.errors.noisy import NoisyCircuit
from budget.memo import distinct
from budget.pauli_algebra import label_bits
from budget.problems import InputError, TooLargeError

SMALL = 0.1
"""First-order infidelity above which the engine warns that the expansion is no longer small."""
LANDING_BUDGET = 1e10
"""Largest (error terms walked) x (qubits) for which the per-qubit map is computed by default
(about 15 s of CPU at the 1,024-qubit, 100-cycle benchmark, which costs 4·10^9)."""

CHEAP_PAIRS = 3e7
"""(terms walked)² x words below which the second order is always formed."""

ORBIT_SECOND = (
    "second order of blocks folded by orbits: within each repetition only (the commutators between "
    "repetitions and with the layers around the block are left out)"
)

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

    def _pass(self, circuit: NoisyCircuit, metric: str, plans: dict, *, grouping=None, labels=(), second: bool = False, orbits: bool = False):
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
                max_unrolled=self.max_unrolled,
                plans=plans,
                orbit_baby=self.orbit_baby,
                cycle_terms=lambda parts: repetition_second_order(parts, direction, words),
            )
            walker.run(circuit.body)
            return sources, sink, walker
        outer = SecondOrderSink(sink, direction, words) if second else sink
        walker = Walker(
            circuit.num_qubits,
            direction,
            outer,
            max_unrolled=self.max_unrolled,
            plans=plans,
            orbit_baby=0 if second else self.orbit_baby,
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

    def _wants_second(self, circuit: NoisyCircuit, budget: Budget, sink: GroupSink, walker: Walker) -> str | None:
        """None to form the second order (it is cheap, or the first order looks cancelled: its
        coherent sum is below a tenth of what the terms would give landing apart), else why not.
        Blocks folded by orbits or approximately are not folded at second order."""
        if not self.second_order:
            return "not asked for"
        cancelled = budget.coherent < 0.1 * term_square_sum(circuit)
        if walker.warnings:
            return "not formed (a block was folded approximately; the second order needs a period or orbit fold)" + (
                "!" if cancelled else ""
            )
        if sink.terms_emitted**2 * num_words(circuit.num_qubits) <= CHEAP_PAIRS or cancelled:
            return None
        return "not formed (costly, and the first order shows no cancellation)"

    @staticmethod
    def _hidden_note(sink: GroupSink, budget: Budget, cancellation: float) -> str | None:
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
        sources, sink, walker = self._pass(circuit, metric, plans)
        budget = aggregate(sink, len(sources.families), state=metric == "state")
        first_walk, first_sources = (sink, walker), sources
        validity, warnings = Validity(), []
        first = budget
        why_not = self._wants_second(circuit, budget, sink, walker)
        if why_not is None:
            try:
                sources, sink2, walker = self._pass(circuit, metric, plans, second=True, orbits=bool(walker.orbit_records))
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
                if note := cancellation_note(share, cancellation, engine=self.name):
                    warnings.append(note)
                if metric == "state" and (note := self._hidden_note(sink2, budget, cancellation)):
                    warnings.append(note)
                    validity = replace(validity, rests_on_cancellation=True)
                if walker.orbit_records:
                    validity = replace(validity, second_order=ORBIT_SECOND + "".join(f"; {n}" for n in walker.cycle_notes))
                    if cancellation < 0.1:
                        warnings.append(f"the first-order error terms largely cancel and {ORBIT_SECOND}: the result may be too small")
        elif self.second_order:
            validity = replace(validity, second_order=why_not.rstrip("!"))
            if why_not.endswith("!"):
                warnings.append(
                    "the first-order error terms largely cancel, but the second-order (commutator) terms "
                    "are not formed for blocks folded by orbits or approximately: the result may be far "
                    "too small (CliffordEngine(orbit_baby=0) folds by the period instead)"
                )
        losses: list = []  # (qubits, infidelity) of each error component, when every order was summed
        if self.second_order and not walker.orbit_records:
            budget, losses, validity = self._all_orders(circuit, metric, plans, budget, first_walk[0], validity, warnings)
        warnings += list(walker.warnings)
        fo, total = first.first_order, budget.total
        shares = _by_family(sources, budget.shares)
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
        details = _details(first, first_sources, walker, self.top, budget).with_records(validity)
        sink, walker = first_walk
        emitted = sink.terms_emitted + sink.rates_emitted
        for rec in walker.orbit_records:  # the landing walk enumerates what the orbit search skipped
            walks = min(rec["count"], rec["longest_orbit"] or self.max_unrolled)
            emitted += rec["terms_per_repetition"] * max(0, walks - rec["baby_steps"])
        cost = emitted * circuit.num_qubits
        qubit_map = self._qubit_map(circuit, cost, sink.builder, plans)
        if qubit_map.qubit_map is not None and metric == "process" and validity.rests_on_cancellation and losses:
            landed = {name: 0.0 for name in circuit.qubits}  # the first-order map shows the cancelled order
            for qubits, loss in losses:
                for q in qubits:
                    landed[circuit.qubits[q]] += loss / len(qubits)
            qubit_map = QubitMap(
                qubit_map=landed,
                qubit_map_quantity=(
                    "coherent process infidelity of the error component on each qubit, all orders "
                    "(a component of k qubits split evenly)"
                ),
            )
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

    def _all_orders(self, circuit, metric, plans, budget: Budget, first_sink: GroupSink, validity: Validity, warnings: list) -> tuple[Budget, list, Validity]:
        """The coherent part to all orders where every component of the error touches at most
        MAX_SUPPORT_QUBITS qubits (budget/engines/clifford/allorders.py), with the (qubits,
        infidelity) of each component; otherwise ``budget`` as it is and no components.

        The coherent shares keep the split of the leading-order terms when those give the size
        within a factor 2, else the split of the first-order term sizes Σ_t |a_t|² per source
        (the leading order then rests on a cancellation that the higher orders decide)."""
        direction = "pull" if metric == "state" else "push"
        sink = AllOrdersSink(GroupSink(first_sink.builder, key="x" if metric == "state" else "xz"), direction)  # cached layer tables
        walker = Walker(circuit.num_qubits, direction, sink, max_unrolled=self.max_unrolled, plans=plans, orbit_baby=0)
        try:
            walker.run(circuit.body)
            exact = sink.infidelity(metric)
        except OutOfReach as why:
            return budget, [], replace(validity, coherent_order=f"second (all orders out of reach: {why})")
        how = f"components of at most {sink.largest} qubit{'s' if sink.largest != 1 else ''}"
        validity = replace(validity, coherent_order=f"all orders ({how})",
                           coherent_second_order_resummed=budget.coherent_resummed + 0.0)
        warnings[:] = [w for w in warnings if "third order" not in w and "commutator" not in w]
        if validity.second_order_share is not None:  # now the share of every order beyond the first
            share = second_order_share(exact, validity.coherent_without_second_order)
            validity = replace(validity, second_order_share=share, rests_on_cancellation=share > SECOND_ORDER_SHARE)
            if note := cancellation_note(share, validity.cancellation, engine=self.name, all_orders=how):
                warnings.append(note)
        lead = budget.coherent
        if 0.5 * exact <= lead <= 2.0 * exact:
            shares = budget.coherent_shares
        else:
            _, amps, tags = first_sink.coherent_terms()
            sizes = np.bincount(tags, weights=np.abs(amps) ** 2, minlength=len(budget.coherent_shares))
            shares = sizes * (lead / sizes.sum()) if sizes.sum() > 0 else np.zeros_like(sizes)
            if lead <= 0:
                shares, lead = sizes, float(sizes.sum())
        return dataclasses.replace(budget, coherent=lead, coherent_shares=shares, coherent_resummed=exact), sink.losses, validity

    def _qubit_map(self, circuit: NoisyCircuit, cost: float, builder: TermBuilder, plans: dict) -> QubitMap:
        if not self.qubit_map:
            return QubitMap()
        if self.qubit_map != "always" and cost > LANDING_BUDGET:
            return QubitMap(
                qubit_map_skipped=f"it needs about {cost:.2g} bit operations (default limit {LANDING_BUDGET:.2g}; "
                "from Python, CliffordEngine(qubit_map='always') computes it)"
            )
        sink = LandingSink(builder)
        Walker(circuit.num_qubits, "push", sink, max_unrolled=self.max_unrolled, plans=plans).run(circuit.body)
        land = sink.landing(circuit.num_qubits)
        return QubitMap(
            qubit_map={name: float(v) for name, v in zip(circuit.qubits, land)},
            qubit_map_quantity="first-order marginal process infidelity per qubit at the output",
        )

    def observable_error(self, circuit: NoisyCircuit, label: str, *, prune: bool | None = None) -> float:
        """First-order change <O>_actual - <O>_ideal of the Pauli observable ``label``."""
        return self.observable_errors(circuit, (label,), prune=prune)[label]

    def observable_errors(
        self, circuit: NoisyCircuit, labels: tuple[str, ...], *, prune: bool | None = None, _plans: dict | None = None
    ) -> dict[str, float]:
        """First-order change of <O> for each Pauli observable (``"Z0Z1"``, ``"X3 Y4"``).

        δ<O> = i<ψ|[H_total, O]|ψ> for the coherent part and -2 p <O> for each stochastic Pauli
        that anticommutes with O. Each observable is walked on its backward light cone unless
        ``prune`` is False; observables whose cone is the whole circuit share one walk.
        """
        prune = self.prune_observables if prune is None else prune
        parsed = {label: parse_observable(label, circuit.qubits) for label in labels}
        out: dict[str, float] = {}
        whole: list[str] = []
        for label, paulis in parsed.items():
            if prune:
                sub, kept = light_cone_circuit(circuit, set(paulis))
                if len(kept) < circuit.num_qubits:
                    index = {q: i for i, q in enumerate(kept)}
                    out.update(self._observables(sub, {label: {index[q]: p for q, p in paulis.items()}}, {}))
                    continue
            whole.append(label)
        if whole:
            out.update(self._observables(circuit, {label: parsed[label] for label in whole}, _plans or {}))
        return {label: out[label] for label in labels}

    def _observables(self, circuit: NoisyCircuit, paulis: dict[str, dict[int, str]], plans: dict) -> dict[str, float]:
        m = circuit.num_qubits
        final = Walker(m, "pull", max_unrolled=self.max_unrolled, plans=plans).run(circuit.body)
        rows = []
        for letters in paulis.values():
            qs = sorted(letters)
            x, z, e = label_bits("".join(letters[q] for q in qs))
            slots = [q for q, b in zip(qs, x) if b] + [m + q for q, b in zip(qs, z) if b]
            rows.append(final.image(np.array([slots]), np.array([e], np.uint8)))
        xo, zo, eo = (np.concatenate([r[i] for r in rows]) for i in range(3))
        sink = ObservableSink(TermBuilder(m, circuit.qubits, Sources()), xo, zo, eo)
        Walker(m, "pull", sink, max_unrolled=self.max_unrolled, plans=plans).run(circuit.body)
        totals = sink.totals()
        every = self._all_orders_observables(circuit, (xo, zo, eo), plans) if self.second_order else None
        if every is not None:
            return dict(zip(paulis, map(float, totals - sink.coherent_totals() + every)))
        if self.second_order and sink.terms_seen**2 * num_words(m) <= PAIR_BUDGET:
            coherent = self._coherent_observables(circuit, (xo, zo, eo), plans)
            if coherent is not None:
                totals = totals - sink.coherent_totals() + coherent
        return dict(zip(paulis, map(float, totals)))

    def _all_orders_observables(self, circuit: NoisyCircuit, obs: tuple, plans: dict) -> np.ndarray | None:
        """Coherent change of each observable to all orders where the error's components touch
        at most MAX_SUPPORT_QUBITS qubits (:meth:`AllOrdersSink.observables`), else None."""
        m = circuit.num_qubits
        sink = AllOrdersSink(GroupSink(TermBuilder(m, circuit.qubits, Sources()), key="x"), "pull")
        try:
            Walker(m, "pull", sink, max_unrolled=self.max_unrolled, plans=plans, orbit_baby=0).run(circuit.body)
            return sink.observables(obs, m)
        except OutOfReach:
            return None

    def _coherent_observables(self, circuit: NoisyCircuit, obs: tuple, plans: dict) -> np.ndarray | None:
        """Coherent change of each observable to second order (linear term of H_1 + H_2 and the
        quadratic terms, budget/engines/clifford/observables.py) from the full input-frame terms of
        one more walk (only when the first walk's terms, paired, stay within PAIR_BUDGET); None when that
        walk goes beyond its budgets or folds approximately (the first-order linear term then
        stands alone)."""
        m = circuit.num_qubits
        sink = GroupSink(TermBuilder(m, circuit.qubits, Sources()), key="x")
        outer = SecondOrderSink(sink, "pull", num_words(m))
        Walker(m, "pull", outer, max_unrolled=self.max_unrolled, plans=plans, orbit_baby=0).run(circuit.body)
        first, second = outer.finish(inject=False)
        if outer.too_costly or outer.unfolded:
            return None
        terms = merge_terms(*(np.concatenate([a[i], b[i]]) for a, b in zip([first], [second]) for i in range(4)))
        out = np.zeros(len(obs[2]))
        for k in range(len(out)):
            linear, quadratic = observable_change(terms, (obs[0][k], obs[1][k], int(obs[2][k])))
            if quadratic is None:
                return None
            out[k] = linear + quadratic
        return out

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
        sources, sink, _ = self._pass(circuit, metric, {}, grouping=grouping, labels=labels)
        a = quadratic_matrix(sink, len(labels), state=metric == "state")
        floor = _by_family(sources, sink.stochastic_by_source(len(sources.families)))
        return QuadraticForm(
            labels, a, np.array([values[lab] for lab in labels], dtype=float), float(sum(floor.values())), floor
        )


def _details(b: Budget, sources: Sources, walker: Walker, top: int, final: Budget) -> Details:
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
            first_order_family_shares=_by_family(sources, shares),
            top_operations=tuple(OperationShare(sources.info[i]["family"], sources.info[i]["gate"],
                                                tuple(sources.info[i]["qubits"]), sources.info[i]["line"],
                                                float(shares[i])) for i in order if shares[i]),
        ),
    )


def _by_family(sources: Sources, shares: np.ndarray) -> dict[str, float]:
    out: dict[str, float] = {}
    for f, v in zip(sources.families, shares):
        out[f] = out.get(f, 0.0) + float(v)
    return out


__all__ = ["CliffordEngine"]
