"""The exact engine: dense simulation of the noisy circuit, repeated blocks by matrix powers.

Which dense form runs (budget/engines/_exact_plan.py):

    coherent errors only  state metric   -> state vector ψ;          F = |<ψ_ideal|ψ>|²
                          process metric -> unitary U;               F_pro = |Tr(U_ideal† U)|²/d²
    incoherent errors     state metric   -> density matrix ρ;        F = <ψ_ideal|ρ|ψ_ideal>
                          process metric -> superoperator S;         F_pro = Tr(S_ideal† S)/d²

with input |0…0> for the state metric; F_pro = (1/d²) Σ_k |Tr(U_ideal† K_k)|² equals
Tr(S_ideal† S)/d² for S = Σ_k K_k ⊗ conj(K_k) (Nielsen, Phys. Lett. A 303, 249 (2002)). The
superoperator is the Choi state of the doubled system reshuffled: the same 16^n numbers and the
same work per gate, so the engine keeps the superoperator, which repeated blocks need anyway.

Each operation's channel (ideal gate, coherent unitary, Pauli rates, depolarizing, relaxation;
budget/errors/noisy.py) is one local matrix (:mod:`budget.engines._exact_local`); consecutive
matrices on at most two qubits are multiplied together before they touch the register
(:mod:`budget.engines._exact_register`). A repeated block (NoisyRepeat, nested allowed) is
either unrolled or replaced by its block matrix to the power N (:mod:`budget.engines._exact_power`:
Schur form for unitaries, eigendecomposition or squaring for channels), whichever is cheaper, so
N = 10^9 costs what N = 2 costs. Shares are left to the analysis layer.
"""

from __future__ import annotations

from functools import reduce
from typing import Callable

import numpy as np

from budget.engines._exact_local import (
    PAULI_BASIS,
    channel_superop,
    gate_unitary,
    pauli_string_matrix,
    pauli_transfer,
    relaxation_superop,
)
from budget.engines._exact_plan import REPEAT_MODES, Plan, make_plan, refusal
from budget.engines._exact_power import channel_power, unitary_power
from budget.engines._exact_register import Fuser, Register
from budget.engines.base import METRICS, EngineResult, Metric, parse_observable
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyLayer, NoisyOperation, NoisyRepeat, Relaxation
from budget.problems import TooLargeError


class _Runner:
    """Propagates one register through the circuit's items with one kind of local matrix."""

    def __init__(
        self,
        n: int,
        site_dim: int,
        local: Callable[[NoisyOperation], np.ndarray],
        idle: Callable[[Relaxation], np.ndarray] | None,
        powered: dict[int, bool],
    ) -> None:
        self.n, self.s = n, site_dim
        self._local, self._idle = local, idle
        self._powered = powered
        self._cache: dict[tuple, np.ndarray] = {}
        self._idle_cache: dict[tuple[float, float], np.ndarray] = {}
        self._powers: dict[int, np.ndarray] = {}
        self.methods: set[str] = set()

    def local(self, nop: NoisyOperation) -> np.ndarray:
        key = _content_key(nop)
        m = self._cache.get(key)
        if m is None:
            m = self._cache[key] = self._local(nop)
        return m

    def idle(self, relax: Relaxation) -> np.ndarray:
        key = (relax.gamma, relax.dephasing_factor)
        m = self._idle_cache.get(key)
        if m is None:
            m = self._idle_cache[key] = self._idle(relax)
        return m

    def run(self, items: tuple[NoisyItem, ...], reg: Register) -> Register:
        fuser = Fuser(reg)
        self._walk(items, reg, fuser)
        fuser.flush()
        return reg

    def _walk(self, items: tuple[NoisyItem, ...], reg: Register, fuser: Fuser) -> None:
        for it in items:
            if isinstance(it, NoisyLayer):
                for nop in it.operations:
                    fuser.add(nop.qubits, self.local(nop))
                if self._idle is not None:
                    for r in it.idle:
                        if not r.is_trivial:
                            fuser.add((r.qubit,), self.idle(r))
            elif self._powered.get(id(it), False):
                fuser.flush()
                reg.apply_full(self._power(it))
            else:
                for _ in range(it.count):
                    self._walk(it.body, reg, fuser)

    def _power(self, rep: NoisyRepeat) -> np.ndarray:
        p = self._powers.get(id(rep))
        if p is None:
            dtype = complex if self.s == 2 else float
            block = self.run(rep.body, Register.identity(self.n, self.s, dtype)).canonical().copy()
            if self.s == 2:
                p, method = unitary_power(block, rep.count), "schur"
            else:
                p, method = channel_power(block, rep.count)
                p = np.ascontiguousarray(p.real)  # a real Pauli transfer matrix
            self.methods.add(method)
            self._powers[id(rep)] = p
        return p


def _from_pauli(data: np.ndarray, n: int) -> np.ndarray:
    """(4^n, C) register in the Pauli basis -> interleaved (r, c) basis on the output side, and on
    the input side too when C = 4^n (an operator): S = T† R T per qubit."""
    out = data.astype(complex).reshape((4,) * n + (data.shape[1],))
    tinv = PAULI_BASIS.conj().T
    for q in range(n):
        out = np.moveaxis(np.tensordot(tinv, out, axes=(1, q)), 0, q)
    if data.shape[1] == 4**n:
        out = out.reshape((4,) * (2 * n))
        for q in range(n):
            out = np.tensordot(out, PAULI_BASIS, axes=(n + q, 0))
            out = np.moveaxis(out, -1, n + q)
    return np.ascontiguousarray(out).reshape(4**n, data.shape[1])


def _content_key(nop: NoisyOperation) -> tuple:
    """Operations with equal content share one local matrix (built once per run)."""
    op = nop.op
    return (
        op.gate,
        len(op.qubits),
        op.params,
        None if op.matrix is None else np.asarray(op.matrix).tobytes(),
        np.asarray(nop.coherent).tobytes(),
        tuple(sorted(nop.pauli_rates.items())),
        nop.depolarizing,
        tuple((r.qubit == op.qubits[0], r.gamma, r.dephasing_factor) for r in nop.relaxation),
    )


def _interleaved_to_matrix(rho: np.ndarray, n: int) -> np.ndarray:
    """Density matrix d x d from the interleaved layout (site index 2 r_q + c_q)."""
    perm = [2 * q for q in range(n)] + [2 * q + 1 for q in range(n)]
    return rho.reshape((2,) * (2 * n)).transpose(perm).reshape(2**n, 2**n)


def _expectation(state: np.ndarray, paulis: dict[int, str], n: int, density: bool) -> float:
    """<O> for a Pauli product O on a state vector or an interleaved density matrix."""
    if density:
        val = state.reshape((4,) * n)
        for q in range(n):  # contract the leading axis each time: Tr(Oρ) = Σ_rc O[c, r] ρ[r, c]
            o = pauli_string_matrix(paulis.get(q, "I")).T.reshape(4)
            val = np.tensordot(o, val, axes=(0, 0))
        return float(np.real(val))
    phi = state.reshape((2,) * n)
    for q, letter in paulis.items():
        phi = np.moveaxis(np.tensordot(pauli_string_matrix(letter), phi, axes=(1, q)), 0, q)
    return float(np.real(np.vdot(state, phi.reshape(-1))))


class ExactEngine:
    """Dense exact simulation; reach limits in budget/engines/_exact_plan.py.

    Args:
        repeats: ``"auto"`` (default) takes the cheaper of unrolling a repeated block and raising
            its block matrix to the power N; ``"power"`` and ``"unroll"`` force one (for checks).
    """

    name = "exact"

    def __init__(self, repeats: str = "auto") -> None:
        if repeats not in REPEAT_MODES:
            raise ValueError(f"repeats = {repeats!r}: expected one of {', '.join(REPEAT_MODES)}")
        self.repeats = repeats

    def fits(self, circuit: NoisyCircuit, metric: Metric) -> str | None:
        """None when the circuit fits, else the reason (qubits, limit, memory, engines that fit)."""
        if metric not in METRICS:
            return f"metric {metric!r} is not one of {', '.join(METRICS)}"
        return refusal(circuit, metric, make_plan(circuit, metric, self.repeats))

    def run(self, circuit: NoisyCircuit, metric: Metric, *, observables: tuple[str, ...] = ()) -> EngineResult:
        """The metric, exactly (to rounding), and signed observable errors <O>_actual - <O>_ideal
        for input |0…0>. Raises TooLargeError (before allocating) when :meth:`fits` refuses."""
        if metric not in METRICS:
            raise ValueError(f"metric {metric!r}: expected one of {', '.join(METRICS)}")
        n = circuit.num_qubits
        parsed = {label: parse_observable(label, n) for label in observables}
        plan = make_plan(circuit, metric, self.repeats)
        reason = refusal(circuit, metric, plan)
        if reason is not None:
            raise TooLargeError(f"engine exact: {reason}")
        ideal_runner = _Runner(n, 2, lambda nop: gate_unitary(nop, ideal=True), None, plan.ideal_powered)
        ideal = self._propagate(ideal_runner, circuit, 2, plan.columns > 1)
        if plan.site_dim == 2:
            runner = _Runner(n, 2, lambda nop: gate_unitary(nop, ideal=False), None, plan.powered)
            actual = self._propagate(runner, circuit, 2, plan.columns > 1)
        else:
            runner = _Runner(
                n,
                4,
                lambda nop: pauli_transfer(channel_superop(nop), len(nop.qubits)),
                lambda r: pauli_transfer(relaxation_superop(r), 1),
                plan.powered,
            )
            actual = _from_pauli(self._propagate(runner, circuit, 4, plan.columns > 1), n)
        infidelity = _infidelity(plan, actual, ideal, n)
        density = plan.site_dim == 4
        out_state, ideal_state = actual[:, 0], ideal[:, 0]  # output for input |0…0>
        obs = {
            label: _expectation(out_state, p, n, density) - _expectation(ideal_state, p, n, False)
            for label, p in parsed.items()
        }
        methods = sorted(ideal_runner.methods | runner.methods)
        warnings = ()
        if any(r.count > 10**6 for r in _repeats(circuit.body)):
            warnings = ("repeat counts above 10^6: phases of the block power carry ~N·1e-16 rad of rounding",)
        return EngineResult(
            engine=self.name,
            metric=metric,
            infidelity=float(np.clip(infidelity, 0.0, 1.0)),
            shares={},
            warnings=warnings,
            details={"form": plan.form, "repeat_methods": ",".join(methods) or "none", "raw_infidelity": infidelity},
            observable_errors=obs,
        )

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
        if isinstance(it, NoisyRepeat):
            yield it
            yield from _repeats(it.body)


def _infidelity(plan: Plan, actual: np.ndarray, ideal: np.ndarray, n: int) -> float:
    d = 2**n
    if plan.form == "vector":
        return 1.0 - abs(np.vdot(ideal[:, 0], actual[:, 0])) ** 2
    if plan.form == "unitary":
        return 1.0 - abs(np.vdot(ideal, actual)) ** 2 / d**2
    if plan.form == "density":
        psi = ideal[:, 0]
        rho = _interleaved_to_matrix(actual[:, 0], n)
        return 1.0 - float(np.real(np.vdot(psi, rho @ psi)))
    # superop: S[(i k), (j l)] in row-major vec order; Tr(S_U† S) = Σ conj(U_ij) U_kl S_ikjl
    perm = [2 * q for q in range(n)] + [2 * q + 1 for q in range(n)]
    full = perm + [2 * n + p for p in perm]
    s = actual.reshape((2,) * (4 * n)).transpose(full).reshape(d, d, d, d)
    return 1.0 - float(np.real(np.einsum("ij,kl,ikjl->", ideal.conj(), ideal, s, optimize=True))) / d**2
