"""The exact engine: dense simulation of the noisy circuit, repeated blocks by matrix powers.

Which dense form runs (budget/engines/exact/plan.py):

    coherent errors only  state metric   -> state vector ψ;          F = |<ψ_ideal|ψ>|²
                          process metric -> unitary U;               F_pro = |Tr(U_ideal† U)|²/d²
    incoherent errors     state metric   -> density matrix ρ;        F = <ψ_ideal|ρ|ψ_ideal>
                          process metric -> superoperator S;         F_pro = Tr(S_ideal† S)/d²

with input |0…0> for the state metric; F_pro = (1/d²) Σ_k |Tr(U_ideal† K_k)|² equals
Tr(S_ideal† S)/d² for S = Σ_k K_k ⊗ conj(K_k) (Nielsen, Phys. Lett. A 303, 249 (2002)). The
superoperator is the Choi state of the doubled system reshuffled: the same 16^n numbers and the
same work per gate, so the engine keeps the superoperator, which repeated blocks need anyway.

Each site of a layer's normal form (budget/errors/normal_form.py: an operation's own errors after
its ideal gate, idle relaxation, context errors) is one local matrix
(:mod:`budget.engines.exact.local`; density
matrices and superoperators are held in the real Pauli basis, channels as Pauli transfer
matrices); consecutive
matrices on at most two qubits are multiplied together before they touch the register
(:mod:`budget.engines.exact.register`), carried through the circuit by
:mod:`budget.engines.exact.runner`. A repeated block (NoisyRepeat, nested allowed) is
either unrolled or replaced by its block matrix to the power N (:mod:`budget.engines.exact.power`:
Schur form for unitaries, eigendecomposition or squaring for channels), whichever is cheaper, so
N = 10^9 costs what N = 2 costs. The metrics are read out by :mod:`budget.engines.exact.readout`.
Family shares come from one more run per family with that family's errors alone, scaled to the
joint value (:mod:`budget.engines.exact.split`); :meth:`ExactEngine.brief` skips them. The ideal
circuit is the same in every one of these runs, so it is propagated once
(:class:`budget.engines.exact.runner.Ideal`); the family runs of one form go through the circuit
as one batch; a superoperator is read in the Pauli basis it is held in
(F_pro = Tr(R_idealᵀ R)/d², :mod:`budget.engines.exact.readout`), never converted back whole.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.base import (
    METRICS,
    MULTIPLY_ADDS_PER_S,
    Engine,
    EngineResult,
    Metric,
    parse_observable,
    zero_result,
)
from budget.engines.details import DenseRun, Details, FamilySplit
from budget.engines.exact.local import pauli_transfer, site_channel, site_unitary
from budget.engines.exact.plan import FORMS, REPEAT_MODES, Plan, make_plan, refusal
from budget.engines.exact.readout import expectation, from_pauli, infidelity, process_infidelity
from budget.engines.exact.runner import Ideal, Runner, content_key, propagate, zero_state_pauli
from budget.engines.exact.split import (
    SHARE_METHOD,
    error_families,
    family_groups,
    member_matrix,
    only_family,
    scaled_shares,
)
from budget.circuit.ir import Operation
from budget.errors.noisy import NoisyCircuit, NoisyItem
from budget.errors.normal_form import SiteErrors
from budget.problems import TooLargeError

Local = Callable[[SiteErrors, Operation | None], np.ndarray | None]
"""A site's local matrix from its errors and the ideal gate before it (None: the site does nothing)."""

BATCH_BYTES = 2**28
"""Largest batch of family-split registers held at once (256 MiB with their buffers); a larger
register runs its families one at a time."""


def local_matrices(site_dim: int) -> Local:
    """The noisy local matrix of a site of a layer's normal form in one register form, built once
    per site content (:func:`budget.engines.exact.runner.content_key`) for a run and its
    family-split runs: U_coh · U_ideal (site dimension 2; None for a site without a unitary part),
    or the site's channel as a real Pauli transfer matrix (4)."""
    if site_dim == 2:
        build = lambda e, gate: site_unitary(e, gate, ideal=False)  # noqa: E731
    else:
        build = lambda e, gate: pauli_transfer(site_channel(e, gate), len(e.qubits))  # noqa: E731
    built: dict[tuple, np.ndarray | None] = {}

    def local(errors: SiteErrors, gate: Operation | None) -> np.ndarray | None:
        key = content_key(errors, gate)
        if key not in built:
            built[key] = build(errors, gate)
        return built[key]

    return local


class _Locals:
    """The local matrices of each register form, shared by a run and its family-split runs."""

    def __init__(self) -> None:
        self._forms: dict[int, Local] = {}

    def get(self, site_dim: int) -> Local:
        if site_dim not in self._forms:
            self._forms[site_dim] = local_matrices(site_dim)
        return self._forms[site_dim]


def _read(form: str, actual: np.ndarray, ideal: Ideal, n: int) -> float:
    """The raw infidelity of one run (budget/engines/exact/readout.py)."""
    if form == "superop":
        return process_infidelity(ideal.transfer(), actual, n)
    if form == "density":
        return infidelity(form, from_pauli(actual, n), ideal.unitary(), n)
    return infidelity(form, actual, ideal.unitary(), n)


def _observables(parsed: dict[str, dict[int, str]], form: str, actual: np.ndarray, ideal: Ideal,
                 n: int) -> dict[str, float]:
    """<O>_actual - <O>_ideal for input |0…0>: the first column of an operator, a state as it is."""
    if not parsed:
        return {}
    if form == "superop":
        v0 = zero_state_pauli(n)
        out = from_pauli((actual @ v0)[:, None], n)[:, 0]
        ref, ref_density = from_pauli((ideal.transfer() @ v0)[:, None], n)[:, 0], True
    else:
        out = from_pauli(actual, n)[:, 0] if form == "density" else actual[:, 0]
        ref, ref_density = ideal.unitary()[:, 0], False
    density = form in ("density", "superop")
    return {label: expectation(out, p, n, density) - expectation(ref, p, n, ref_density) for label, p in parsed.items()}


class ExactEngine(Engine):
    """Dense exact simulation; reach limits in budget/engines/exact/plan.py.

    Args:
        repeats: ``"auto"`` (default) takes the cheaper of unrolling a repeated block and raising
            its block matrix to the power N; ``"power"`` and ``"unroll"`` force one (for checks).
        split: fill the family shares (one more run per family with errors,
            :mod:`budget.engines.exact.split`); False leaves them empty (:meth:`brief`).
    """

    name = "exact"
    capabilities = frozenset({"estimate_seconds", "observables"})

    def __init__(self, repeats: str = "auto", *, split: bool = True) -> None:
        if repeats not in REPEAT_MODES:
            raise ValueError(f"repeats = {repeats!r}: expected one of {', '.join(REPEAT_MODES)}")
        self.repeats = repeats
        self.split = split

    def fits(self, circuit: NoisyCircuit, metric: Metric) -> str | None:
        """None when the circuit fits, else the reason (qubits, limit, memory, engines that fit)."""
        if metric not in METRICS:
            return f"metric {metric!r} is not one of {', '.join(METRICS)}"
        if circuit.has_mid_circuit:
            return circuit.mid_circuit_reason()
        return refusal(circuit, metric, make_plan(circuit, metric, self.repeats))

    def estimate_seconds(self, circuit: NoisyCircuit, metric: Metric) -> float:
        """Estimated run time: the plan's multiply-adds (:func:`make_plan`) at MULTIPLY_ADDS_PER_S,
        with the family-split runs when they will run (two families or more)."""
        work = make_plan(circuit, metric, self.repeats).work
        families = error_families(circuit) if self.split else ()
        if len(families) > 1:
            one = self._split_engine()
            work += sum(make_plan(only_family(circuit, f), metric, one.repeats).work for f in families)
        return work / MULTIPLY_ADDS_PER_S

    def brief(self) -> "ExactEngine":
        """This engine without the family split (shares left empty): one run."""
        return ExactEngine(self.repeats, split=False)

    def run(self, circuit: NoisyCircuit, metric: Metric, *, observables: tuple[str, ...] = ()) -> EngineResult:
        """The metric, exactly (to rounding), and signed observable errors <O>_actual - <O>_ideal
        for input |0…0>. Raises TooLargeError (before allocating) when :meth:`fits` refuses."""
        if metric not in METRICS:
            raise ValueError(f"metric {metric!r}: expected one of {', '.join(METRICS)}")
        n = circuit.num_qubits
        parsed = {label: parse_observable(label, circuit.qubits) for label in observables}
        plan = make_plan(circuit, metric, self.repeats)
        reason = refusal(circuit, metric, plan)
        if reason is not None:
            raise TooLargeError(f"{circuit.source}: engine exact: {reason}")
        if not circuit.has_errors:
            return zero_result(self.name, metric, observables, first_order=None)
        ideal = Ideal(circuit, plan.columns > 1, plan.ideal_powered, plan.powered)
        matrices = _Locals()
        actual, runner = self._actual(circuit, plan, matrices)
        value = _read(plan.form, actual, ideal, n)
        obs = _observables(parsed, plan.form, actual, ideal, n)
        methods = sorted(ideal.methods | runner.methods)
        warnings = ()
        if any(r.count > 10**6 for r in _repeats(circuit.body)):
            warnings = ("repeat counts above 10^6: phases of the block power carry ~N·1e-16 rad of rounding",)
        total = float(np.clip(value, 0.0, 1.0))
        details = Details(dense=DenseRun(form=plan.form, repeat_methods=",".join(methods) or "none", raw_infidelity=value))
        shares: dict[str, float] = {}
        if self.split:
            shares, split = self._shares(circuit, metric, total, ideal, matrices)
            details = details.with_records(split)
        return EngineResult(
            engine=self.name,
            metric=metric,
            infidelity=total,
            shares=shares,
            warnings=warnings,
            details=details,
            observable_errors=obs,
        )

    @staticmethod
    def _actual(circuit: NoisyCircuit, plan: Plan, matrices: _Locals) -> tuple[np.ndarray, Runner]:
        """The noisy circuit propagated in the plan's form: (s^n, C), Pauli basis when s = 4."""
        runner = Runner(circuit.num_qubits, plan.site_dim, matrices.get(plan.site_dim), plan.powered)
        return propagate(runner, circuit, plan.columns > 1), runner

    def _split_engine(self) -> "ExactEngine":
        """The engine of the family-split runs: no split of its own, and in ``auto`` mode the
        cheaper of unrolling and a block power by the plan's estimate (the main run prefers a cheap
        block power so that its time does not depend on N; the split runs need only the value)."""
        return ExactEngine("cheapest" if self.repeats == "auto" else self.repeats, split=False)

    def _shares(self, circuit: NoisyCircuit, metric: Metric, total: float, ideal: Ideal,
                matrices: _Locals) -> tuple[dict[str, float], FamilySplit]:
        """Family shares by isolation (:mod:`budget.engines.exact.split`) and their record: one
        noisy run per family, the runs of one form in batches, each read against the joint
        run's ideal."""
        families = error_families(circuit)
        if len(families) == 1:
            return {families[0]: total}, FamilySplit(SHARE_METHOD, 0, total)
        # the powered blocks of the joint circuit as the split runs' mode chooses them
        plan = make_plan(circuit, metric, self._split_engine().repeats)
        isolated: dict[str, float] = {}
        for incoherent, group in family_groups(circuit, families).items():
            form, s, _, operator = FORMS[(incoherent, metric)]
            n = circuit.num_qubits
            member_bytes = 2 * (16 if s == 2 else 8) * float(s**n) * (s**n if operator else 1)
            size = max(1, int(BATCH_BYTES // member_bytes))
            for start in range(0, len(group), size):
                batch = group[start:start + size]
                for f, actual in zip(batch, self._batch(circuit, batch, s, operator, plan, matrices)):
                    isolated[f] = float(np.clip(_read(form, actual, ideal, n), 0.0, 1.0))
        isolated = {f: isolated[f] for f in families}
        return scaled_shares(isolated, total), FamilySplit(SHARE_METHOD, len(families), sum(isolated.values()))

    @staticmethod
    def _batch(circuit: NoisyCircuit, batch: tuple[str, ...], s: int, operator: bool, plan: Plan,
               matrices: _Locals) -> np.ndarray:
        """The runs with each family of ``batch`` alone (only_family) in one walk: (B, s^n, C)."""
        local = matrices.get(s)
        runner = Runner(circuit.num_qubits, s, lambda e, gate: member_matrix(e, gate, batch, s, local),
                        plan.powered if s == 4 else plan.ideal_powered, batch=len(batch))
        out = propagate(runner, circuit, operator)
        return out if len(batch) > 1 else out[None]


def _repeats(items: tuple[NoisyItem, ...]):
    for it in items:
        if gate_kind(it, "exact engine") is Kind.REPEAT:
            yield it
            yield from _repeats(it.body)
