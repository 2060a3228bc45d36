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
(:mod:`budget.engines.exact.register`). A repeated block (NoisyRepeat, nested allowed) is
either unrolled or replaced by its block matrix to the power N (:mod:`budget.engines.exact.power`:
Schur form for unitaries, eigendecomposition or squaring for channels), whichever is cheaper, so
N = 10^9 costs what N = 2 costs. The metrics are read out by :mod:`budget.engines.exact.readout`.
Family shares come from one more run per family with that family's errors alone, scaled to the
joint value (:mod:`budget.engines.exact.split`); :meth:`ExactEngine.brief` skips them.
"""

from __future__ import annotations

from functools import reduce
from typing import Callable

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.exact.local import PAULI_BASIS, pauli_transfer, site_channel, site_unitary
from budget.engines.exact.plan import REPEAT_MODES, make_plan, refusal
from budget.engines.exact.power import channel_power, unitary_power
from budget.engines.exact.readout import expectation, from_pauli, infidelity
from budget.engines.exact.register import Fuser, Register
from budget.engines.base import METRICS, MULTIPLY_ADDS_PER_S, Engine, EngineResult, Metric, parse_observable, zero_result
from budget.engines.details import DenseRun, Details, FamilySplit
from budget.engines.exact.split import SHARE_METHOD, error_families, only_family, scaled_shares
from budget.circuit.ir import Operation
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyLayer, NoisyRepeat
from budget.errors.normal_form import SiteErrors, layer_errors
from budget.memo import ObjectKey
from budget.problems import TooLargeError


class _Runner:
    """Propagates one register through the circuit's items with one kind of local matrix: ``local``
    maps a site of a layer's normal form and the ideal gate before it (None for sites after the
    gates) to its matrix, or None when the site does nothing in this form."""

    def __init__(
        self,
        n: int,
        site_dim: int,
        local: Callable[[SiteErrors, Operation | None], np.ndarray | None],
        powered: dict[ObjectKey, bool],
    ) -> None:
        self.n, self.s = n, site_dim
        self._local = local
        self._powered = powered
        self._cache: dict[tuple, np.ndarray | None] = {}
        self._layers: dict[ObjectKey, list[tuple[tuple[int, ...], np.ndarray]]] = {}
        self._powers: dict[ObjectKey, np.ndarray] = {}
        self.methods: set[str] = set()

    def layer(self, layer: NoisyLayer) -> list[tuple[tuple[int, ...], np.ndarray]]:
        """(qubits, local matrix) of each site of the layer that acts, in channel order."""
        hit = self._layers.get(ObjectKey(layer))
        if hit is None:
            hit = []
            ops = layer.operations
            for i, errors in enumerate(layer_errors(layer)):
                gate = ops[i].op if i < len(ops) else None
                key = _content_key(errors, gate)
                if key not in self._cache:
                    self._cache[key] = self._local(errors, gate)
                if self._cache[key] is not None:
                    hit.append((errors.qubits, self._cache[key]))
            self._layers[ObjectKey(layer)] = hit
        return hit

    def run(self, items: tuple[NoisyItem, ...], reg: Register) -> Register:
        fuser = Fuser(reg)
        self._walk(items, reg, fuser)
        fuser.flush()
        return reg

    def _walk(self, items: tuple[NoisyItem, ...], reg: Register, fuser: Fuser) -> None:
        for it in items:
            if gate_kind(it, "exact engine") is Kind.LAYER:
                for qubits, m in self.layer(it):
                    fuser.add(qubits, m)
            elif self._powered.get(ObjectKey(it), False):
                fuser.flush()
                reg.apply_full(self._power(it))
            else:
                for _ in range(it.count):
                    self._walk(it.body, reg, fuser)

    def _power(self, rep: NoisyRepeat) -> np.ndarray:
        p = self._powers.get(ObjectKey(rep))
        if p is None:
            dtype = complex if self.s == 2 else float
            block = self.run(rep.body, Register.identity(self.n, self.s, dtype)).canonical().copy()
            if self.s == 2:
                p, method = unitary_power(block, rep.count), "schur"
            else:
                p, method = channel_power(block, rep.count)
                p = np.ascontiguousarray(p.real)  # a real Pauli transfer matrix
            self.methods.add(method)
            self._powers[ObjectKey(rep)] = p
        return p


def _content_key(errors: SiteErrors, gate: Operation | None) -> tuple:
    """Sites with equal content share one local matrix (built once per run): the ideal gate, the
    error terms, and where on the site each relaxation acts."""
    return (
        None if gate is None else (gate.gate, gate.params, None if gate.matrix is None else np.asarray(gate.matrix).tobytes()),
        len(errors.qubits),
        None if errors.unitary is None else np.asarray(errors.unitary).tobytes(),
        errors.stochastic,
        errors.groups,
        tuple((errors.qubits.index(r.qubit), r.gamma, r.dephasing_factor) for r in errors.relaxation),
    )


def _channel(errors: SiteErrors, gate: Operation | None) -> np.ndarray:
    """The site's channel as a real Pauli transfer matrix (:mod:`budget.engines.exact.local`)."""
    return pauli_transfer(site_channel(errors, gate), len(errors.qubits))


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
        ideal_runner = _Runner(n, 2, lambda e, gate: site_unitary(e, gate, ideal=True), plan.ideal_powered)
        ideal = self._propagate(ideal_runner, circuit, 2, plan.columns > 1)
        if plan.site_dim == 2:
            runner = _Runner(n, 2, lambda e, gate: site_unitary(e, gate, ideal=False), plan.powered)
            actual = self._propagate(runner, circuit, 2, plan.columns > 1)
        else:
            runner = _Runner(n, 4, _channel, plan.powered)
            actual = from_pauli(self._propagate(runner, circuit, 4, plan.columns > 1), n)
        value = infidelity(plan.form, actual, ideal, n)
        density = plan.site_dim == 4
        out_state, ideal_state = actual[:, 0], ideal[:, 0]  # output for input |0…0>
        obs = {
            label: expectation(out_state, p, n, density) - expectation(ideal_state, p, n, False)
            for label, p in parsed.items()
        }
        methods = sorted(ideal_runner.methods | runner.methods)
        warnings = ()
        if any(r.count > 10**6 for r in _repeats(circuit.body)):
            warnings = ("repeat counts above 10^6: phases of the block power carry ~N·1e-16 rad of rounding",)
        total = float(np.clip(value, 0.0, 1.0))
        details = Details(dense=DenseRun(form=plan.form, repeat_methods=",".join(methods) or "none", raw_infidelity=value))
        shares: dict[str, float] = {}
        if self.split:
            shares, split = self._shares(circuit, metric, total)
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

    def _split_engine(self) -> "ExactEngine":
        """The engine of the family-split runs: no split of its own, and in ``auto`` mode the
        cheaper of unrolling and a block power by the plan's estimate (the main run prefers a cheap
        block power so that its time does not depend on N; the split runs need only the value)."""
        return ExactEngine("cheapest" if self.repeats == "auto" else self.repeats, split=False)

    def _shares(self, circuit: NoisyCircuit, metric: Metric, total: float) -> tuple[dict[str, float], FamilySplit]:
        """Family shares by isolation (:mod:`budget.engines.exact.split`) and their record."""
        families = error_families(circuit)
        if len(families) == 1:
            return {families[0]: total}, FamilySplit(SHARE_METHOD, 0, total)
        one = self._split_engine()
        isolated = {f: one.run(only_family(circuit, f), metric).infidelity for f in families}
        return scaled_shares(isolated, total), FamilySplit(SHARE_METHOD, len(families), sum(isolated.values()))

    @staticmethod
    def _propagate(runner: _Runner, circuit: NoisyCircuit, s: int, operator: bool) -> np.ndarray:
        """Identity (operator forms) or |0…0> propagated through the circuit, as (s^n, C)."""
        n = circuit.num_qubits
        dtype = complex if s == 2 else float
        if operator:
            reg = Register.identity(n, s, dtype)
        elif s == 2:  # |0…0>
            reg = Register(np.eye(1, 2**n, dtype=dtype)[0], n, 2)
        else:  # |0><0| = (1 + Z)/2 per qubit: Pauli coefficients (1, 0, 0, 1)/√2
            reg = Register(reduce(np.kron, [PAULI_BASIS[:, 0].real] * n), n, 4)
        return runner.run(circuit.body, reg).canonical()


def _repeats(items: tuple[NoisyItem, ...]):
    for it in items:
        if gate_kind(it, "exact engine") is Kind.REPEAT:
            yield it
            yield from _repeats(it.body)
