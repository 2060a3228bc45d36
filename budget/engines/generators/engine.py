"""The ``generators`` engine: first-order error generators pushed to the end of the circuit.

Method (Blume-Kohout et al., "A taxonomy of small Markovian errors", PRX Quantum 3, 020335
(2022); design.md §4). Each operation's error is a small generator: a Hamiltonian part
H_op = Σ h_P P and jump operators (stochastic Pauli rates, depolarizing, T1/T2 relaxation). Every
Hamiltonian part is pushed to the end of the circuit by the ideal remainder R: H_total = Σ R H_op R†.
Hamiltonian parts add in amplitude, stochastic parts in probability. Repeated blocks use the
periodic closed form (:mod:`budget.engines.matrices.periodic`), so N = 10**9 costs what N = 1 costs.

Reported numbers, d = 2**n, ψ the ideal output of |0…0>:

- coherent part, exponentiated: process 1 - |Tr e^{-iH_total}/d|², state 1 - |<ψ|e^{-iH_total}|ψ>|²;
- coherent part, first order: process Tr(H_total²)/d = Σ_P h_P,total², state Var_ψ(H_total);
- stochastic part, first order: process Σ p over every Pauli rate (relaxation through its Pauli
  twirl, exact for the process fidelity), with multiplicities; state Σ p (<L†L> - |<L>|²) over
  every jump operator L at the ideal state of its time (p (1 - <P>²) for a Pauli);
- ``infidelity`` = exponentiated coherent + first-order stochastic, clipped to [0, 1];
  ``first_order`` = first-order coherent + first-order stochastic.

Shares: family f gets Σ_g Re<H_f, H_g> (process Tr(H_f H_g)/d; state Re<ψ|H_f H_g|ψ> - <H_f><H_g>)
scaled by exponentiated/first-order coherent, plus its stochastic part; the shares add up to
``infidelity`` exactly. Idle relaxation is family ``"idle"``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Hashable, Sequence

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.matrices.apply import as_rows
from budget.engines.matrices.channels import by_family, content_cache
from budget.engines.generators.dense import MAX_DENSE_QUBITS, DensePropagator
from budget.engines.generators.jumps import StateJumps
from budget.engines.generators.krylov import expm_apply
from budget.engines.generators.observables import IncoherentObservables, observable_vector
from budget.engines.generators.states import StatePath
from budget.engines.orders import (
    cancellation_note,
    second_order_share,
    split_by_sizes,
    term_norm_sum,
    term_square_by_family,
    validity_details,
)
from budget.engines.base import METRICS, MULTIPLY_ADDS_PER_S, Engine, EngineResult, Metric, QuadraticForm, parse_observable, zero_result
from budget.engines.details import Details, Parts
from budget.engines.exact.engine import ExactEngine
from budget.engines.generators.depth import RepeatSweep
from budget.engines.matrices.periodic import coherent_infidelity
from budget.errors.knobs import knob_grouping
from budget.errors.noisy import NoisyCircuit, NoisyRepeat
from budget.errors.normal_form import layer_errors
from budget.problems import TooLargeError

MAX_STATE_QUBITS = 16
"""State vectors only (state metric, no repeated block)."""
NORM_LIMIT_RAD = 0.3
STOCHASTIC_LIMIT = 0.05


@dataclass(frozen=True)
class _Coherent:
    """The coherent part: exponentiated and first-order values, family shares (first order),
    the size of H_total, and for the state metric ψ and e^{-iH_total}ψ."""

    exact: float
    first: float
    shares: dict[Hashable, float]
    norm_rad: float
    psi: np.ndarray | None = None
    chi: np.ndarray | None = None
    second_share: float | None = None
    first_norm: float | None = None
    second_norm: float | None = None
    leading: float | None = None  # quadratic estimate of H_1 + H_2 (the shares' scale), when formed
    all_orders: str | None = None  # how every order was summed, when it was


def _hs_norm(h: np.ndarray) -> float:
    """Normalised Hilbert-Schmidt norm of the traceless part, sqrt(Tr(H²)/d - (Tr H/d)²), radians."""
    d = h.shape[0]
    tr = np.trace(h).real / d
    return float(np.sqrt(max(np.vdot(h, h).real / d - tr**2, 0.0)))


def _ground(n: int) -> np.ndarray:
    psi = np.zeros(2**n, dtype=complex)
    psi[0] = 1.0
    return psi


def _needs_dense(circuit: NoisyCircuit, metric: str, observables: tuple[str, ...] = ()) -> bool:
    return metric == "process" or circuit.has_repeats or (bool(observables) and circuit.has_incoherent)


def _count_repeats(items) -> int:
    """Repeated blocks as written (each body's Schur basis is computed once)."""
    return sum(1 + _count_repeats(it.body) for it in items if gate_kind(it, "generators engine") is Kind.REPEAT)


def range_note(stochastic: float, coherent: float) -> str | None:
    """None while the engine's value is a probability, else what left the range and by how much.

    The value is the exponentiated coherent part (exact for commuting errors, accurate well beyond
    the quadratic formula otherwise, design.md §4) plus the first-order sum of incoherent error
    probabilities. When that sum reaches 1 the sum of probabilities no longer approximates a
    probability of error and the engine gives no value. (The warnings of
    :meth:`GeneratorsEngine._warnings` start much earlier, where the value becomes approximate.)
    Below the limit the value was checked against the exact engine (tests/test_validity.py).
    """
    total = coherent + stochastic
    if total <= 1.0:
        return None
    return (f"coherent part {coherent:.3g} plus the first-order sum of incoherent errors {stochastic:.3g} make "
            f"{total:.3g}, {total:.3g}x the largest possible infidelity")


class GeneratorsEngine(Engine):
    """First-order error generators; see the module docstring for the exact definitions."""

    name = "generators"
    capabilities = frozenset({"estimate_seconds", "observables", "quadratic_form", "repeat_sweep"})

    def __init__(self, *, second_order: bool = True) -> None:
        """``second_order``: form the effective generator beyond first order (second order, and
        exactly where the block's principal logarithm is safe; budget/engines/generators/dense.py); False
        keeps the first order alone."""
        self.second_order = second_order

    def fits(self, circuit: NoisyCircuit, metric: Metric, observables: tuple[str, ...] = ()) -> str | None:
        """None when the circuit fits, else a short reason (what is held, qubits, limit)."""
        if metric not in METRICS:
            return f"metric {metric!r} is not one of {', '.join(METRICS)}"
        if circuit.has_mid_circuit:
            return circuit.mid_circuit_reason()
        n = circuit.num_qubits
        if _needs_dense(circuit, metric, observables):
            if n > MAX_DENSE_QUBITS:
                return f"dense matrices, limit {MAX_DENSE_QUBITS} qubits"
        elif n > MAX_STATE_QUBITS:
            return f"state vectors, limit {MAX_STATE_QUBITS} qubits"
        return None

    def estimate_seconds(self, circuit: NoisyCircuit, metric: Metric) -> float:
        """Estimated run time, from counted multiply-adds (nothing is allocated).

        Dense path (process metric, repeats): each gate conjugates every group's d x d matrix,
        G · 4^n · 2^(k+1) per gate of k qubits; each repeated body adds its Schur decomposition and
        the periodic sums, about (40 + 6 G) d³; the final spectrum about 10 d³. State vectors:
        G · 2^n · 2^k per gate, times the Lanczos passes (about 30). G counts the families with
        a Hamiltonian error (at least 1).
        """
        n = circuit.num_qubits
        layers = circuit.distinct_layers()
        groups = max(1, len({e.source.family for layer in layers for e in layer_errors(layer) if e.hamiltonian}))
        gates = sum(2 ** len(nop.qubits) for layer in layers for nop in layer.sites)
        ops = sum(len(layer.sites) for layer in layers)
        repeats = _count_repeats(circuit.body)
        overhead = 3e4 * ops  # Python work per operation, in multiply-adds (as the exact engine counts it)
        if _needs_dense(circuit, metric):
            d = float(2**n)
            work = groups * d * d * 2 * gates + repeats * (40 + 6 * groups) * d**3 + 10 * d**3 + overhead
        else:
            work = 30 * groups * float(2**n) * gates + overhead
        return work / MULTIPLY_ADDS_PER_S

    def brief(self) -> "GeneratorsEngine":
        """This engine (it has no optional extras to skip)."""
        return self

    def run(self, circuit: NoisyCircuit, metric: Metric, *, observables: tuple[str, ...] = ()) -> EngineResult:
        """The metric to first order (see the module docstring) and the signed first-order errors
        <O>_actual - <O>_ideal of Pauli observables; TooLargeError when :meth:`fits` refuses."""
        if metric not in METRICS:
            raise ValueError(f"metric {metric!r}: expected one of {', '.join(METRICS)}")
        reason = self.fits(circuit, metric, observables)
        if reason is not None:
            raise TooLargeError(f"{circuit.source}: engine generators: {reason}")
        if not circuit.has_errors:
            for label in observables:
                parse_observable(label, circuit.num_qubits)
            return zero_result(self.name, metric, observables)
        n = circuit.num_qubits
        content_of = content_cache(n, by_family)
        dense = DensePropagator(n, content_of, second_order=self.second_order)
        jumps = StateJumps(n, content_of, dense)
        stoch = self._stochastic(circuit, metric, content_of, jumps)
        uses_path = n > MAX_DENSE_QUBITS and (metric == "state" or observables)
        path = StatePath(circuit, content_of, dense) if uses_path else None
        coh = self._coherent(circuit, metric, dense, path, want_state=bool(observables))
        stoch_total = sum(stoch.values())
        total = float(np.clip(coh.exact + stoch_total, 0.0, 1.0)) + 0.0
        lead = coh.first if coh.leading is None else coh.leading
        if lead > 0 and 0.5 * coh.exact <= lead <= 2.0 * coh.exact:
            shares = {f: coh.exact / lead * v for f, v in coh.shares.items()}
        else:  # the leading order misjudges the size (it rests on a cancellation): split by term sizes
            shares = split_by_sizes(term_square_by_family(circuit), coh.exact)
        for f, v in stoch.items():
            shares[f] = shares.get(f, 0.0) + v
        raw = sum(shares.values())
        if raw and abs(raw - total) > 1e-15:
            shares = {f: v * total / raw for f, v in shares.items()}  # only when clipped
        warnings = self._warnings(circuit, metric, coh.norm_rad, stoch_total, jumps.approximations)
        details = Details(parts=Parts(coherent_exponentiated=coh.exact, coherent_first_order=coh.first,
                                      stochastic_first_order=stoch_total, hamiltonian_norm_rad=coh.norm_rad))
        if coh.second_share is not None:
            sizes = term_norm_sum(circuit)
            cancellation = coh.first_norm / sizes if sizes > 0 else 1.0
            details = details.with_records(validity_details(coh.second_share, cancellation, coh.first_norm, coh.second_norm))
            if note := cancellation_note(coh.second_share, cancellation, engine=self.name, all_orders=coh.all_orders):
                warnings.insert(0, note)
        elif coh.exact > 0 and self.second_order:
            warnings.append(
                f"state metric on {n} qubits: the coherent part is first order only (the second-order "
                f"commutator term needs dense matrices, up to {MAX_DENSE_QUBITS} qubits); where the "
                "first-order terms cancel (echoes) the result can be far too small"
            )
        obs: dict[str, float] = {}
        if observables:
            obs, notes = self._observables(circuit, observables, content_of, dense, path, coh)
            warnings += notes
        return EngineResult(
            engine=self.name,
            metric=metric,
            infidelity=total,
            shares=shares,
            first_order=coh.first + stoch_total,
            warnings=tuple(dict.fromkeys(warnings)),
            details=details,
            observable_errors=obs,
            beyond_range=range_note(stoch_total, coh.exact),
        )

    # -- parts -------------------------------------------------------------------------------

    def _stochastic(self, circuit, metric, content_of, jumps: StateJumps) -> dict[str, float]:
        if metric == "state":
            return jumps.run(circuit.body, _ground(circuit.num_qubits))[1]
        out: dict[str, float] = {}
        for layer, mult in circuit.multiplicities():
            for f, v in content_of(layer).process_stochastic.items():
                out[f] = out.get(f, 0.0) + mult * v
        return out

    def _coherent(self, circuit, metric, dense: DensePropagator, path: StatePath | None, want_state: bool = False) -> _Coherent:
        """The coherent part. Where dense matrices fit, from the second-order effective generator
        H = H_1 + H_2 of the whole circuit (:mod:`budget.engines.generators.dense`); otherwise (state metric
        on more than MAX_DENSE_QUBITS qubits, no repeats) from H_1 by state vectors."""
        if metric == "process" or circuit.num_qubits <= MAX_DENSE_QUBITS:
            return self._coherent_dense(circuit, metric, dense, want_state)
        psi = path.final_state()
        phis = path.group_vectors()
        if not phis:
            return _Coherent(0.0, 0.0, {}, 0.0, psi, psi)
        hpsi = sum(phis.values())
        mean = np.vdot(psi, hpsi).real
        shares = {k: float(np.vdot(v, hpsi).real - np.vdot(psi, v).real * mean) for k, v in phis.items()}
        first = max(float(np.vdot(hpsi, hpsi).real - mean**2), 0.0)
        kr = expm_apply(path.matvec, psi)
        exact = float(np.clip(1 - abs(np.vdot(psi, kr.vector)) ** 2, 0.0, 1.0))
        norm = float(np.max(np.abs(kr.ritz_values - mean)))
        noisy = path.noisy_state() if self.second_order else None
        if noisy is None:
            return _Coherent(exact, first, shares, norm, psi, kr.vector)
        rest = noisy - np.vdot(psi, noisy) * psi  # the part of ψ̃ orthogonal to ψ: every order
        every = float(np.clip(np.vdot(rest, rest).real, 0.0, 1.0))
        return _Coherent(
            every, first, shares, norm, psi, noisy,
            second_share=second_order_share(every, exact),
            first_norm=float(np.sqrt(first)),
            second_norm=float("nan"),
            all_orders="state vectors with every coherent error unitary applied",
        )

    def _coherent_dense(self, circuit, metric, dense: DensePropagator, want_state: bool) -> _Coherent:
        state = metric == "state" or want_state
        block = dense.block(circuit.body, with_unitary=state)
        d = 2**circuit.num_qubits
        psi = block.unitary[:, 0].copy() if state else None
        if not block.keys or not np.any(block.hamiltonians):
            return _Coherent(0.0, 0.0, {}, 0.0, psi, psi, second_share=0.0, first_norm=0.0, second_norm=0.0)
        h = block.total()
        h = (h + h.conj().T) / 2
        h2 = block.second_total()
        h2 = (h2 + h2.conj().T) / 2
        w, v = np.linalg.eigh(h)
        if metric == "process":
            tr = np.trace(h).real / d
            shares = {k: float(np.vdot(hk, h).real / d - tr * np.trace(hk).real / d) for k, hk in zip(block.keys, block.hamiltonians)}
            exact = float(np.clip(1 - abs(np.mean(np.exp(-1j * w))) ** 2, 0.0, 1.0))
            first = max(float(np.mean(w**2) - np.mean(w) ** 2), 0.0)
            exact1, first1 = coherent_infidelity(h - h2)
            norm = float(np.max(np.abs(w - tr)))
        else:
            hpsi = h @ psi
            mean = np.vdot(psi, hpsi).real
            shares = {k: float(np.vdot(hk @ psi, hpsi).real - np.vdot(psi, hk @ psi).real * mean) for k, hk in zip(block.keys, block.hamiltonians)}
            weights = np.abs(v.conj().T @ psi) ** 2
            exact = float(np.clip(1 - abs(np.sum(weights * np.exp(-1j * w))) ** 2, 0.0, 1.0))
            first = max(float(np.sum(weights * w**2) - np.sum(weights * w) ** 2), 0.0)
            exact1, first1 = coherent_infidelity(h - h2, psi)
            norm = float(np.max(np.abs(w - mean)))
        chi = v @ (np.exp(-1j * w) * (v.conj().T @ psi)) if state else None
        return _Coherent(
            exact, first1, shares, norm, psi, chi,
            leading=first,
            second_share=second_order_share(exact, exact1),
            first_norm=_hs_norm(h - h2),
            second_norm=_hs_norm(h2),
            all_orders="dense logarithm of the circuit's error unitary" if block.all_orders else None,
        )

    def _warnings(self, circuit, metric, norm: float, stoch: float, notes: list[str]) -> list[str]:
        what = []
        if norm > NORM_LIMIT_RAD:
            what.append(f"the summed coherent error reaches {norm:.2f} rad (first order holds below ~{NORM_LIMIT_RAD} rad)")
        if stoch > STOCHASTIC_LIMIT:
            what.append(f"the incoherent errors add up to {stoch:.3f} (first order holds below ~{STOCHASTIC_LIMIT})")
        if not what:
            return list(notes)
        exact = ExactEngine()
        exact_fits = exact.fits(circuit, metric) is None
        seconds = exact.estimate_seconds(circuit, metric) if exact_fits else 0.0
        trust = (
            "trust the exact engine instead (it fits this circuit"
            + (f"; estimated {seconds / 60:.0f} min, run it with --engine exact)" if seconds > 60 else ")")
            if exact_fits
            else "no exact engine fits this circuit, so read the number as an estimate of its size only"
        )
        return [f"the first-order model is leaving its range: {' and '.join(what)}; {trust}"] + list(notes)

    def _observables(self, circuit, labels, content_of, dense, path: StatePath, coh: _Coherent) -> tuple[dict[str, float], list[str]]:
        n = circuit.num_qubits
        if coh.psi is not None:
            psi, chi = coh.psi, coh.chi
        else:
            psi = path.final_state()
            chi = expm_apply(path.matvec, psi).vector if path.keys else psi
        inc = IncoherentObservables(n, content_of, dense)
        out = {}
        for label in labels:
            letters = parse_observable(label, circuit.qubits)
            ideal = np.vdot(psi, observable_vector(letters, psi, n)).real
            err = np.vdot(chi, observable_vector(letters, chi, n)).real - ideal
            if circuit.has_incoherent:
                err += inc.change(circuit.body, letters, psi)
            out[label] = float(err)
        return out, inc.approximations

    def repeat_sweep(self, circuit: NoisyCircuit, metric: Metric) -> RepeatSweep:
        """``circuit`` used as a cycle: the engine's value for N cycles, for any N, from one
        propagation of the cycle (:class:`budget.engines.generators.depth.RepeatSweep`); values
        beyond the engine's range (:func:`range_note`) are marked. TooLargeError when the
        repeated circuit does not fit."""
        reason = self.fits(NoisyCircuit(circuit.qubits, (NoisyRepeat(circuit.body, 2),)), metric)
        if reason is not None:
            raise TooLargeError(f"{circuit.source}: depth curve with the generators engine: {reason}")
        return RepeatSweep(circuit, metric, range_note)

    def depth_curve(self, circuit: NoisyCircuit, metric: Metric, counts: Sequence[int]):
        """The values of :meth:`repeat_sweep` at every N in ``counts`` at once."""
        return self.repeat_sweep(circuit, metric).values(counts)

    def quadratic_form(self, circuit: NoisyCircuit, metric: Metric) -> QuadraticForm:
        """e ≈ δᵀAδ + floor in the coherent knobs, from the propagated unit generators.

        Rows are (family, knob); δ is the knob's value (the largest in magnitude when operations
        of one family disagree: each operation's generator is scaled by its own value over δ, so
        δ K reproduces the first-order Hamiltonian exactly). Operations whose Hamiltonian has no
        knob generators enter as knob ``"pauli"`` with δ = 1 and their whole Hamiltonian as K.
        A is Re Tr(K_a K_b)/d (process) or Re<K_a K_b>_ψ - <K_a><K_b> (state); the floor is the
        first-order stochastic part.
        """
        reason = self.fits(circuit, metric)
        if reason is not None:
            raise TooLargeError(f"{circuit.source}: engine generators: {reason}")
        n = circuit.num_qubits
        grouping, values = knob_grouping(circuit)
        content_of = content_cache(n, grouping)
        dense = DensePropagator(n, content_of)
        keys: list[Hashable] = list(values)
        if metric == "process":
            block = dense.block(circuit.body, with_unitary=False)
            d = 2**n
            k = np.zeros((len(keys), d, d), dtype=complex)  # no knob at all: an empty form
            for i, key in enumerate(keys):
                if key in block.keys:
                    k[i] = block.group(key)
            flat = as_rows(k)
            tr = np.trace(k, axis1=1, axis2=2).real / d
            a = (flat.conj() @ flat.T).real / d - np.outer(tr, tr)
        else:
            path = StatePath(circuit, content_of, dense)
            psi = path.final_state()
            phis = path.group_vectors()
            v = np.zeros((len(keys), 2**n), dtype=complex)
            for i, key in enumerate(keys):
                v[i] = phis.get(key, 0.0)
            means = (v @ psi.conj()).real
            a = (v.conj() @ v.T).real - np.outer(means, means)
        family_content = content_cache(n, by_family)
        jumps = StateJumps(n, family_content, DensePropagator(n, family_content))
        floor = self._stochastic(circuit, metric, family_content, jumps)
        return QuadraticForm(
            labels=tuple(keys),
            matrix=(a + a.T) / 2,
            values_rad=np.array([values[key] for key in keys], dtype=float),
            floor=float(sum(floor.values())),
            floor_sources=floor,
        )
