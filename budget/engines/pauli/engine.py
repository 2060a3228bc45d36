"""The ``pauli`` engine: first-order error budgets of any circuit by sparse Pauli propagation.

The generator picture of design.md §4 (Blume-Kohout et al., "A taxonomy of small Markovian errors",
PRX Quantum 3, 020335 (2022)) with the error generators carried as sparse sums of Pauli strings
through every gate: a Clifford gate maps a string to one string, any other gate splits it by its
Pauli transfer matrix restricted to the string's support (rz(θ): X -> cos θ X + sin θ Y). This is
sparse Pauli dynamics / Pauli propagation with coefficient truncation (Begušić & Chan,
arXiv:2306.16372 (2023), published as Begušić, Gray & Chan, Sci. Adv. 10, eadk4321 (2024); noisy
Pauli propagation: arXiv:2501.13101 (2025)), applied to the error generators. Definitions are those of
the generators engine (process: Σ_Q A_Q² + Σ p; state: Var(H_in) + Σ p (<L†L> - |<L>|²) with jump
operators; observables: i<[H, O]> + Σ p <L† O L - ½{L†L, O}>), so untruncated the two engines agree
to rounding; the reported ``infidelity`` resums the coherent part as the clifford engine does.

Truncation (``truncate`` = EPS): rows below EPS are dropped after each layer and their norms add up
to ``truncation_bound``, a rigorous bound on |first order reported - first order untruncated|
(:mod:`budget.engines.pauli._sweep`). With ``truncate=None`` the engine starts at EPS = 10⁻² of the
largest coherent coefficient and divides EPS by 1.5-4 (TIGHTEN) while the bound exceeds ``target`` x the result
and the time budget allows.

The process metric is read in the frame of the circuit's middle (:mod:`budget.engines.pauli._meet`).
The coherent part is summed to every order where the errors' light cones stay within 8 qubits
(:mod:`budget.engines.pauli._allorders`); elsewhere, where the first order cancels (or the sums are
small), the second-order Magnus term is added (:mod:`budget.engines.pauli._second`). Observables
get the same orders (:mod:`budget.engines.pauli._observe`). :meth:`PauliEngine.estimate_seconds`
models row growth.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, replace

import numpy as np

from budget.engines.matrices.channels import by_family
from budget.engines.frame.groups import Budget, budget_result, size_warning
from budget.engines.frame.pauli_frame import num_words
from budget.engines.base import METRICS, Engine, EngineResult, Metric, QuadraticForm, parse_observable, zero_result
from budget.engines.clifford.second import PAIR_BUDGET, TooCostly
from budget.engines.details import Details, Drilldown, Folding, Parts, QubitMap, RepeatedBlock, Truncation, Validity
from budget.engines.orders import cancellation_note, second_order_share, term_norm_sum, term_square_sum, validity_details
from budget.engines.pauli._landing import LandingWalk, Skipped
from budget.engines.pauli._allorders import LightCones, every_order
from budget.engines.pauli._observe import beyond_first, every_order_reach
from budget.engines.pauli._meet import meet
from budget.engines.pauli._store import Store
from budget.engines.pauli._plan import PlanBook
from budget.engines.pauli._readout import coherent_budget, first_order_bound, group_amplitudes, jump_costs, zero_readout
from budget.engines.pauli._sweep import MAX_TERMS, OutOfTime, Sweep, TooManyLayers, TooManyTerms
from budget.engines.pauli._vector import VECTOR_QUBITS, JumpValues, fits_vector, forward, input_amplitudes, vector_work, zero_state
from budget.circuit.clifford_check import is_clifford
from budget.errors.knobs import knob_grouping
from budget.errors.noisy import IDLE, NoisyCircuit
from budget.problems import InputError, TooLargeError

TARGET = 0.01
"""Default goal for truncation_bound / first-order result."""
TIME_BUDGET_S = 60.0
"""Default wall time for tightening the threshold (the first pass always completes)."""
LANDING_BUDGET_S = 5.0
"""Wall time for the per-qubit map's walk (beyond it the map is skipped, with the reason)."""
MAP_TERMS = 500_000
"""The per-qubit map is skipped without a walk when the budget's own pass held more terms than this
(its walk, over the whole depth with every stochastic error kept apart, holds more)."""
MAP_SHARE = 1e-4
"""Per-qubit map: terms whose squared amplitude is below this fraction of an average qubit's share
of the first-order value are left out (their sum is stated)."""
START = 1e-2
"""First threshold, relative to the largest coherent coefficient of the circuit."""
TAG_BALANCE = 10.0
"""Jump-tag threshold relative to the coherent one (measured on Ising loops: the two parts of the
bound come out about equal, docs/benchmarks.md)."""
BRIEF_BUDGET_S = 5.0
"""Tightening budget of :meth:`PauliEngine.brief`."""
TIGHTEN = 4.0
"""Each tightening divides the threshold by at most this factor (by 1.2 (bound / goal)^1.5, at
least 1.5: the bound fell about as eps^(2/3) between 1e-5 and 5e-6 on the 100-qubit Ising loop)."""
CANCELLED = 0.1
"""First order below this fraction of Σ_t ‖G_t‖² counts as cancelled (the clifford engine's test)."""
CHEAP_TERMS = 5000
"""Largest rows held by the first pass for which the second order is always formed."""
CHEAP_PAIRS = 2e7
"""Largest pair-words (half the executed coherent terms squared, times words per row) for which the
second order is formed without a cancellation (the 200-qubit Clifford brickwork of
benchmarks/bench_orders.py needs 7e7 and took 25 s for a change below the fourth digit)."""
GROWTH = 0.6
"""Row growth per layer per non-Clifford site per qubit (estimate_seconds; the 100-qubit Ising loop
grows about 2.5x per Trotter step and half at the default threshold)."""
SECONDS_PER_ROW_LAYER = 3.5e-7
"""CPU seconds per row per walked layer (estimate_seconds; fitted to the 100-qubit, 14-step Ising loop)."""
SECONDS_PER_AMPLITUDE = 1e-8
"""CPU seconds per amplitude and gate or site of the small-register state vector (estimate_seconds)."""
SECONDS_PER_VECTOR_STEP = 5e-4
"""CPU seconds per gate or site step of the state vector whatever its size (numpy call overhead;
the 10-qubit, 10-step Ising loop: 0.47 s for 800 steps)."""
ROWS_PER_QUBIT = 25_000
"""Rows held per qubit at most in the estimate: truncation stops the growth (the most measured is
2.4·10⁴ per qubit, 100-qubit Ising loop of 20 steps at 10⁻⁵ rad; 10-qubit public circuits 3.5·10³)."""


@dataclass(frozen=True)
class PassResult:
    """One sweep's numbers (first order, shares per family, bound, observables)."""

    budget: object
    families: list[str]
    bound: float
    jump_bound: float
    observables: dict[str, float]
    observable_bounds: dict[str, float]
    terms_max: int
    blocks: list[dict]
    eps: float
    seconds: float
    observable_notes: tuple[str, ...] = ()


def _families(circuit: NoisyCircuit) -> list[str]:
    fams = dict.fromkeys(nop.family for layer in circuit.distinct_layers() for nop in layer.sites)
    if any(not r.is_trivial for layer in circuit.distinct_layers() for r in layer.idle):
        fams[IDLE] = None
    return list(fams)


def _largest_coefficient(circuit: NoisyCircuit) -> float:
    hs = [abs(c) for layer in circuit.distinct_layers() for nop in layer.sites for c in nop.hamiltonian.values()]
    return max(hs, default=0.0)


def _tag_scale(circuit: NoisyCircuit) -> float:
    """TAG_BALANCE x 2 sqrt(e) for e = Σ h² over executed operations (the coherent part without
    interference): a dropped coherent coefficient c moves the result by about 2 sqrt(e) |c|, and
    jump-tag rows, far more numerous, are held to TAG_BALANCE of that."""
    e = sum(mult * sum(c * c for c in nop.hamiltonian.values()) for layer, mult in circuit.multiplicities() for nop in layer.sites)
    return TAG_BALANCE * 2 * float(np.sqrt(e)) if e > 0 else TAG_BALANCE


def _vector_seconds(circuit: NoisyCircuit) -> float:
    work = vector_work(circuit)
    return work * SECONDS_PER_AMPLITUDE + work / 2**circuit.num_qubits * SECONDS_PER_VECTOR_STEP


def _kappa_total(book: PlanBook, circuit: NoisyCircuit) -> float:
    return float(sum(m * book(layer).kappa for layer, m in circuit.multiplicities()))


class PauliEngine(Engine):
    """Sparse Pauli propagation engine (see module docstring).

    Args:
        truncate: coefficient threshold in radians; 0 keeps every term (exact first order);
            None chooses and tightens it automatically.
        target: goal for truncation_bound / result when ``truncate`` is None.
        time_budget_s: wall time for tightening (the first pass always completes).
        qubit_map: compute the per-qubit map of where the error lands (:mod:`._landing`, at most
            LANDING_BUDGET_S; :meth:`brief` leaves it out).
    """

    name = "pauli"
    capabilities = frozenset({"estimate_seconds", "observables", "quadratic_form"})
    folds_repeats = False  # non-Clifford repeats are walked cycle by cycle (a fixed point or convergence ends them early)

    def __init__(self, *, truncate: float | None = None, target: float = TARGET, time_budget_s: float = TIME_BUDGET_S,
                 second_order: bool = True, vector_qubits: int = VECTOR_QUBITS, qubit_map: bool = True):
        if truncate is not None and not (truncate >= 0 and np.isfinite(truncate)):
            raise InputError(f"truncate = {truncate!r}: expected a number >= 0 (0 keeps every term)")
        self.truncate, self.target, self.time_budget_s = truncate, target, time_budget_s
        self.second_order = second_order
        self.vector_qubits = vector_qubits
        self.qubit_map = qubit_map

    def _with(self, **changes) -> "PauliEngine":
        kw = dict(truncate=self.truncate, target=self.target, time_budget_s=self.time_budget_s,
                  second_order=self.second_order, vector_qubits=self.vector_qubits, qubit_map=self.qubit_map)
        return PauliEngine(**{**kw, **changes})

    def configure(self, *, truncate: float | None = None, **_ignored) -> "PauliEngine":
        """The same engine with another threshold (the CLI's ``--truncate``)."""
        return self._with(truncate=truncate)

    def brief(self) -> "PauliEngine":
        """The same engine with at most BRIEF_BUDGET_S for tightening the threshold (depth curves,
        twirled variants and ensembles run it many times)."""
        return self._with(time_budget_s=min(self.time_budget_s, BRIEF_BUDGET_S), qubit_map=False)

    def fits(self, circuit: NoisyCircuit, metric: Metric, observables: tuple[str, ...] = ()) -> str | None:
        """None unless the circuit has mid-circuit items (measurement, reset, if). A repeated block
        of any count is accepted: a run that would walk more than MAX_WALKED_LAYERS layers (a block
        neither Clifford, at a fixed point nor converged) stops with a refusal
        (:class:`~budget.engines.pauli._sweep.TooManyLayers`); ``estimate_seconds`` counts repeats
        in full, so ``auto`` keeps away from such runs."""
        if metric not in METRICS:
            return f"metric {metric!r} is not one of {', '.join(METRICS)}"
        if circuit.has_mid_circuit:
            return circuit.mid_circuit_reason()
        return None

    def estimate_seconds(self, circuit: NoisyCircuit, metric: Metric) -> float:
        """Estimated run time from a model of term growth with depth (counts only, nothing allocated).

        Rows R are walked layer by layer as the sweeps do: each layer adds its coherent terms
        (state metric: its jump tags too) and multiplies R by 1 + GROWTH · s, s the non-Clifford
        sites of the layer per qubit (a rotation splits the rows it touches in two; rows spread
        over the light cone, so a share of them is touched), capped at min(4^n, MAX_TERMS,
        ROWS_PER_QUBIT · n) (truncation stops the growth: the most rows measured per qubit). The
        process metric (and the state metric on registers read from the state vector, which adds
        its amplitude steps) walks each half of the depth (meeting point); repeats are counted in full
        (fixed points and folds are not foreseen, so the estimate errs long). Time = Σ R ·
        SECONDS_PER_ROW_LAYER. Calibrated on the Ising loop of docs/benchmarks.md ("Pauli"); an
        order of magnitude, not more."""
        n = circuit.num_qubits
        cap = float(min(4.0**min(n, 40), MAX_TERMS, ROWS_PER_QUBIT * max(n, 1)))
        vector = metric == "state" and fits_vector(circuit, self.vector_qubits)
        per_layer = []
        for layer, mult in circuit.multiplicities():
            new = sum(len(nop.hamiltonian) for nop in layer.sites)
            if metric == "state" and not vector:  # jump tags: every local Pauli of an incoherent site
                new += sum(4 ** len(nop.qubits) - 1 for nop in layer.sites if nop.has_incoherent)
                new += 3 * sum(1 for r in layer.idle if not r.is_trivial)
            sites = sum(1 for nop in layer.operations if not is_clifford(nop.op)) / max(n, 1)
            per_layer.append((new, sites, mult))
        total = 0.0
        halves = (1,) if metric == "state" and not vector else (0.5, 0.5)
        for half in halves:
            rows = 0.0
            for new, sites, mult in per_layer:
                count = max(1, int(mult * half))
                growth = 1.0 + GROWTH * sites
                for _ in range(min(count, 64)):  # beyond 64 cycles the rows are extrapolated
                    rows = min(cap, rows * growth + new)
                    total += rows
                total += rows * max(0, count - 64)
        return total * SECONDS_PER_ROW_LAYER + (_vector_seconds(circuit) if vector else 0.0) + 0.05

    def _check(self, circuit: NoisyCircuit, metric: Metric) -> None:
        if metric not in METRICS:
            raise ValueError(f"metric {metric!r}: expected one of {', '.join(METRICS)}")
        reason = self.fits(circuit, metric)
        if reason is not None:
            raise TooLargeError(f"{circuit.source}: engine pauli: {reason}")

    # -- one pass -----------------------------------------------------------------------------

    def evaluate(
        self, circuit: NoisyCircuit, metric: str, *, eps: float, observables: tuple[str, ...] = (), deadline: float | None = None
    ) -> PassResult:
        """One sweep at threshold ``eps`` (raises OutOfTime past ``deadline``)."""
        start = time.monotonic()
        n = circuit.num_qubits
        try:
            letters = tuple(parse_observable(label, n) for label in observables)
        except ValueError as err:
            raise InputError(f"{circuit.source}: {err}") from None
        families = _families(circuit)
        columns = {f: i for i, f in enumerate(families)}
        scale = np.ones(len(families))
        state = metric == "state"
        vector = state and fits_vector(circuit, self.vector_qubits)
        amplitudes = None
        cones = every_order_reach(circuit) if letters and self.second_order else None
        apart = isinstance(cones, LightCones)  # the coherent change of observables added to every order
        if state and not vector:
            book = PlanBook(n, "pull", by_family, columns, jumps=True, generators=bool(letters), coherent_generators=not apart)
            sweep = Sweep(n, book, eps, scale=scale, observables=letters, deadline=deadline,
                          tag_scale=_tag_scale(circuit), kappa_total=_kappa_total(book, circuit) if letters else 0.0)
            sweep.run(circuit.body)
            values = zero_readout(sweep.tags, sweep.tag_count)
            costs, tag_bound = jump_costs(sweep.occurrences, values, sweep.tag_dropped)
            drift = sweep.bound_l1
        else:
            sweep = meet(circuit.body, lambda way: Sweep(
                n, PlanBook(n, way, by_family, columns, jumps=False, generators=False), eps, scale=scale, deadline=deadline))
            tag_bound, drift = 0.0, sweep.bound_l2
        if vector:  # small register: read-offs from the state vector (_vector)
            jumps = JumpValues(PlanBook(n, "pull", by_family, columns, jumps=True, generators=False))
            psi_mid = forward(sweep.head, zero_state(n), jumps)
            forward(sweep.tail, psi_mid, jumps)
            amplitudes = input_amplitudes(sweep.coh, sweep.head, psi_mid, n)
            costs, tag_bound = jump_costs(jumps.occurrences, jumps.values, np.zeros(0))
            drift = sweep.bound_l1
        if state:
            sto = np.array([costs.get(f, 0.0) for f in families])
        else:
            sto = np.array([sweep.stochastic.get(f, 0.0) for f in families])
        budget = coherent_budget(sweep.coh, sto, state=state, amplitudes=amplitudes)
        bound = first_order_bound(budget.coherent, drift) + tag_bound
        obs, obs_bounds, terms, blocks = {}, {}, sweep.terms_max, list(sweep.blocks)
        obs_notes: list[str] = []
        if letters:
            osweep = sweep
            if not state or vector:
                obook = PlanBook(n, "pull", lambda nop: [], {}, jumps=False, generators=True, coherent_generators=not apart)
                osweep = Sweep(n, obook, eps, scale=np.zeros(0), observables=letters, deadline=deadline,
                               kappa_total=_kappa_total(obook, circuit))
                osweep.run(circuit.body)
                terms = max(terms, osweep.terms_max)
            vals = zero_readout(osweep.err, len(letters))
            if self.second_order:
                vals, note = beyond_first(circuit, cones, osweep.obs, vals, eps, deadline, len(sweep.coh))
                if note:
                    obs_notes.append(note)
            obs = {label: float(v) for label, v in zip(observables, vals)}
            obs_bounds = {label: float(b) for label, b in zip(observables, osweep.obs_bound)}
        return PassResult(budget, families, float(bound), float(tag_bound), obs, obs_bounds, terms, blocks, eps,
                          time.monotonic() - start, tuple(obs_notes))

    # -- public -------------------------------------------------------------------------------

    def run(self, circuit: NoisyCircuit, metric: Metric, *, observables: tuple[str, ...] = ()) -> EngineResult:
        """First-order and resummed infidelity, family shares, observables, truncation bound."""
        self._check(circuit, metric)
        if not circuit.has_errors:
            for label in observables:
                self._observable(circuit, label)
            return zero_result(self.name, metric, tuple(observables))
        result, notes = self._tightened(circuit, metric, tuple(observables))
        b, validity, more = self._leading(circuit, metric, result)
        shares = {f: float(v) for f, v in zip(result.families, b.shares)}
        every = validity is not None and (validity.coherent_order or "").startswith("all orders")
        # summed to every order, the coherent part needs no warning about resumming independent groups
        warnings = list(notes) + more + ([] if every else size_warning(b)) + list(result.observable_notes)
        details = Details(
            parts=Parts(coherent_first_order=result.budget.coherent, coherent_exponentiated=b.coherent_resummed,
                        stochastic_first_order=b.stochastic, coherent_groups=b.groups,
                        max_group_amplitude_rad=b.max_amplitude),
            validity=validity,
            truncation=Truncation(truncation_bound=result.bound, truncation_bound_jumps=result.jump_bound,
                                  truncate=result.eps, pauli_terms_max=result.terms_max,
                                  observable_truncation_bounds=result.observable_bounds or None),
            folding=Folding(repeated_blocks=tuple(RepeatedBlock(**b) for b in result.blocks)),
            drilldown=Drilldown(first_order_family_shares={
                f: float(v) for f, v in zip(result.families, result.budget.first_order_shares)}),
        )
        if self.qubit_map and result.terms_max > MAP_TERMS:
            details = details.with_records(QubitMap(qubit_map_skipped=(
                f"the budget's walk held {result.terms_max:,} Pauli terms (the map's walk holds more; limit "
                f"{MAP_TERMS:,}); a larger --truncate holds fewer terms")))
        elif self.qubit_map:
            details = details.with_records(self._landing(circuit, result.eps, result.budget.first_order))
        out = budget_result(self.name, metric, b, shares, warnings, details, result.observables)
        return replace(out, first_order=float(result.budget.first_order))

    @staticmethod
    def _landing(circuit: NoisyCircuit, eps: float, first_order: float) -> QubitMap:
        """The per-qubit map (:mod:`budget.engines.pauli._landing`), or why not. Threshold: ``eps``
        when 0 (untruncated), else the larger of ``eps`` and the amplitude whose square is
        MAP_SHARE of an average qubit's share of the first-order value (the map is a picture: terms
        far below a qubit's share are left out, and their sum is said)."""
        n = circuit.num_qubits
        cut = 0.0 if eps == 0 else max(eps, float(np.sqrt(MAP_SHARE * first_order / n)))
        walk = LandingWalk(n, cut, time.monotonic() + LANDING_BUDGET_S)
        try:
            land = walk.run(circuit)
        except Skipped as why:
            return QubitMap(qubit_map_skipped=f"{why} ({LANDING_BUDGET_S:.0f} s); a larger --truncate holds fewer terms")
        left = f" (terms below {cut:.2g} rad left out, {walk.dropped:.2g} in all)" if cut > 0 else ""
        return QubitMap(
            qubit_map={name: float(v) for name, v in zip(circuit.qubits, land)},
            qubit_map_quantity="first-order marginal process infidelity per qubit at the output" + left,
        )

    @staticmethod
    def _observable(circuit: NoisyCircuit, label: str) -> dict[int, str]:
        try:
            return parse_observable(label, circuit.num_qubits)
        except ValueError as err:
            raise InputError(f"{circuit.source}: {err}") from None

    def _leading(self, circuit: NoisyCircuit, metric: str, result: PassResult) -> tuple[Budget, Validity | None, list[str]]:
        """The budget to report: the coherent part to every order where the errors' light cones stay
        small (:func:`budget.engines.pauli._allorders.every_order`), else with the second-order
        term (:meth:`_second`), with the validity details of :mod:`budget.engines.orders`."""
        if not self.second_order:
            return result.budget, None, []
        if term_square_sum(circuit) == 0.0:  # no coherent error: nothing beyond the first order
            return self._second(circuit, metric, result)
        every = every_order(circuit, metric, result.budget, result.families, engine=self.name)
        if not isinstance(every, str):
            return every
        b, validity, notes = self._second(circuit, metric, result)
        lower = "second" if validity.second_order_share is not None else "first"
        return b, replace(validity, coherent_order=f"{lower} (all orders out of reach: {every})"), notes

    def _second(self, circuit: NoisyCircuit, metric: str, result: PassResult) -> tuple[Budget, Validity, list[str]]:
        """With the second-order (commutator) term of the effective generator
        when the first order looks cancelled (its coherent sum below CANCELLED x what the terms would
        give landing apart) or the sums are small (at most CHEAP_TERMS rows), else the first order;
        with the validity details of :mod:`budget.engines.orders` and its warnings."""
        first = result.budget
        squares = term_square_sum(circuit)
        cancelled = first.coherent < CANCELLED * squares
        terms = sum(m * len(nop.hamiltonian) for layer, m in circuit.multiplicities() for nop in layer.operations)
        pairs = 0.5 * float(terms) ** 2 * num_words(circuit.num_qubits)  # what the sweep would pair, at most
        cheap = result.terms_max <= CHEAP_TERMS and pairs <= CHEAP_PAIRS
        if not (cancelled or cheap) or squares == 0.0:
            return first, Validity(second_order="not formed (costly, and the first order shows no cancellation)"), []
        try:
            coh = self._second_sum(circuit, metric, result.eps)
        except (TooCostly, TooManyLayers) as stop:
            warn = ["the first-order error terms largely cancel and their second-order (commutator) terms were too "
                    "many to form: the result may be far too small"] if cancelled else []
            limit = f"more than {PAIR_BUDGET:.0e} pair operations" if isinstance(stop, TooCostly) else "too many layers to walk"
            return first, Validity(second_order=f"not formed ({limit})"), warn
        b = coherent_budget(coh, first.stochastic_shares, state=metric == "state")
        share = second_order_share(b.coherent_resummed, first.coherent_resummed)
        sizes = term_norm_sum(circuit)
        cancellation = float(np.sqrt(first.coherent)) / sizes if sizes > 0 else 1.0
        validity = replace(validity_details(share, cancellation, float(np.sqrt(first.coherent)), None),
                           coherent_without_second_order=first.coherent_resummed + 0.0)
        notes = [note] if (note := cancellation_note(share, cancellation, engine=self.name)) else []
        size = float(np.sum(coh.total() ** 2))  # what H_1 + H_2 would cost the process metric
        if metric == "state" and cancellation < 0.1 and size > 0 and b.coherent < 0.01 * size:
            validity = replace(validity, rests_on_cancellation=True)
            notes.append(
                f"state metric: the first-order error terms cancel and the second-order term leaves the input state "
                f"almost unchanged (state infidelity {b.coherent:.2g} against {size:.2g} for the process metric), so "
                "the state value comes from the third order, which the pauli engine leaves out: use the generators "
                "or exact engine where they fit")
        return b, validity, notes

    def _second_sum(self, circuit: NoisyCircuit, metric: str, eps: float):
        """H_1 + H_2 (coherent store, family columns) from one sweep carrying the second order
        (:mod:`budget.engines.pauli._second`): the whole circuit in one direction (no meeting point:
        the two halves' cross commutator would pair every row with every row)."""
        n = circuit.num_qubits
        families = _families(circuit)
        columns = {f: i for i, f in enumerate(families)}
        way = "pull" if metric == "state" else "push"
        sweep = Sweep(n, PlanBook(n, way, by_family, columns, jumps=False, generators=False), eps,
                      scale=np.ones(len(families)), second=True)
        sweep.run(circuit.body)
        return Store.concat([sweep.coh, sweep.second.sum]).merged()

    def _first(self, circuit: NoisyCircuit, metric: str, observables: tuple[str, ...], eps: float) -> PassResult:
        try:
            return self.evaluate(circuit, metric, eps=eps, observables=observables)
        except TooManyLayers as err:
            raise TooLargeError(f"{circuit.source}: {err}") from None
        except TooManyTerms as err:
            raise TooLargeError(
                f"{circuit.source}: engine pauli: more than {err.args[1]:,} Pauli terms ({err.args[0]:,}) at threshold "
                f"{eps:.3g} rad; a larger --truncate holds fewer (the bound then grows)"
            ) from None

    def _tightened(self, circuit: NoisyCircuit, metric: str, observables: tuple[str, ...]) -> tuple[PassResult, list[str]]:
        if self.truncate is not None:
            return self._first(circuit, metric, observables, self.truncate), []
        h = _largest_coefficient(circuit)
        if h == 0.0 and not circuit.has_incoherent:
            return self._first(circuit, metric, observables, 0.0), []
        eps = START * (h if h > 0 else 1e-3)
        deadline = time.monotonic() + self.time_budget_s
        best = self._first(circuit, metric, observables, eps)
        while best.bound > self.target * best.budget.first_order and best.bound > 0:
            over = best.bound / (self.target * best.budget.first_order)
            eps /= min(TIGHTEN, max(1.5, 1.2 * over**1.5))  # bound ∝ eps^(2/3) or so on the Ising loops
            try:
                best = self.evaluate(circuit, metric, eps=eps, observables=observables, deadline=deadline)
            except (OutOfTime, TooManyTerms, TooManyLayers) as stop:
                why = (f"the {self.time_budget_s:.0f} s budget" if isinstance(stop, OutOfTime) else
                       f"{stop.args[1]:,} terms" if isinstance(stop, TooManyTerms) else "the walked-layer limit")
                return best, [
                    f"truncation: the bound {best.bound:.2g} is {best.bound / max(best.budget.first_order, 1e-300):.1%} "
                    f"of the first-order result at threshold {best.eps:.2g}; tightening stopped at {why} "
                    "(use --truncate for a smaller threshold)"
                ]
        return best, []

    def quadratic_form(self, circuit: NoisyCircuit, metric: Metric) -> QuadraticForm:
        """e ≈ δᵀAδ + floor over (family, knob) labels (:func:`budget.errors.knobs.knob_grouping`,
        as the generators and clifford engines): the knobs' unit generators are carried as the
        columns of one sum, A_ab = Σ_g Re(conj(B_ga) B_gb) over its groups (process: Paulis; state:
        X parts without x = 0). Threshold: ``truncate``, else the one the budget run settles on;
        the floor (first-order incoherent part per family) comes from that run."""
        self._check(circuit, metric)
        budget_pass, _ = self._tightened(circuit, metric, ())
        grouping, values = knob_grouping(circuit)
        labels = tuple(values)
        columns = {lab: i for i, lab in enumerate(labels)}
        vals = np.array([values[lab] for lab in labels], dtype=float)
        nonzero = np.abs(vals[vals != 0])
        scale = np.where(vals != 0, np.abs(vals), nonzero.mean() if len(nonzero) else 1.0)
        state = metric == "state"
        n = circuit.num_qubits
        if state:
            sweep = Sweep(n, PlanBook(n, "pull", grouping, columns, jumps=False, generators=False), budget_pass.eps, scale=scale)
            sweep.run(circuit.body)
        else:
            sweep = meet(circuit.body, lambda way: Sweep(
                n, PlanBook(n, way, grouping, columns, jumps=False, generators=False), budget_pass.eps, scale=scale))
        b = group_amplitudes(sweep.coh, state=state)
        a = (b.conj().T @ b).real if len(b) else np.zeros((len(labels), len(labels)))
        sto = budget_pass.budget.stochastic_shares
        floor = {f: float(v) for f, v in zip(budget_pass.families, sto) if v}
        return QuadraticForm(labels, (a + a.T) / 2, vals, float(sum(floor.values())), floor)
