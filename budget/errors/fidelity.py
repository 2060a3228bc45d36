"""Each operation's error channel and the naive fidelity product.

Conventions: matrices in gate order, first qubit most significant (cirq's convention); a Pauli
label such as ``"XZ"`` means X on the operation's first qubit and Z on its second (the Pauli
algebra itself is :mod:`budget.pauli_algebra`).

Process fidelity of a channel E relative to the identity (the error channel of an operation is
measured against "no error"): F_pro = (1/d²) Σ_k |Tr K_k|² over its Kraus operators K_k, and the
average gate fidelity is F_avg = (d F_pro + 1)/(d + 1) (Nielsen, Phys. Lett. A 303, 249 (2002)).
"""

from __future__ import annotations

import math

import numpy as np

from budget.errors.noisy import NoisyCircuit, NoisyOperation, Relaxation
from budget.errors.normal_form import SiteErrors, operation_errors
from budget.memo import ObjectKey
from budget.pauli_algebra import I, pauli_matrix


def _embed(k: np.ndarray, pos: int, n: int) -> np.ndarray:
    out = np.ones((1, 1), dtype=complex)
    for j in range(n):
        out = np.kron(out, k if j == pos else I)
    return out


def _stage(ops: list[np.ndarray]) -> np.ndarray:
    """Stack Kraus operators, dropping those that are exactly zero."""
    kept = [k for k in ops if np.any(k)]
    return np.array(kept, dtype=complex)


def site_kraus(errors: SiteErrors) -> list[np.ndarray]:
    """Kraus operators of one site's error channel on the site's qubits (gate order), read from
    its normal form (:mod:`budget.errors.normal_form`).

    Order of application (noisy.py): the coherent unitary (``errors.unitary``), then each Pauli
    channel of ``errors.stochastic`` (``errors.groups``) ρ -> (1 - Σ p_P) ρ + Σ p_P P ρ P (the
    Pauli rates, then depolarizing λ as every P ≠ I at λ/d², which is ρ -> (1-λ) ρ + λ I/d), then
    T1/T2 relaxation on each qubit (:meth:`Relaxation.kraus`). The ideal gate itself is not
    included: E_actual = E ∘ U_ideal.
    """
    n = len(errors.qubits)
    d = 2**n
    stages = [_stage([np.eye(d, dtype=complex) if errors.unitary is None else np.asarray(errors.unitary, dtype=complex)])]
    start = 0
    for size in errors.groups or ((len(errors.stochastic),) if errors.stochastic else ()):
        part = errors.stochastic[start:start + size]
        start += size
        p0 = 1.0 - math.fsum(p for _, p in part)
        if p0 < -1e-12 or any(p < 0 for _, p in part):
            raise ValueError(f"Pauli rates {dict(part)}: probabilities must be >= 0 and sum to <= 1")
        stages.append(_stage([math.sqrt(max(p0, 0.0)) * np.eye(d)] + [math.sqrt(p) * pauli_matrix(l) for l, p in part]))
    for r in errors.relaxation:
        if not r.is_trivial:
            pos = errors.qubits.index(r.qubit)
            stages.append(_stage([_embed(k, pos, n) for k in r.kraus()]))
    total = stages[0]
    for s in stages[1:]:
        total = (s[:, None] @ total[None, :]).reshape(-1, d, d)
    return list(total)


def error_channel_kraus(nop: NoisyOperation) -> list[np.ndarray]:
    """:func:`site_kraus` of one operation's own errors.

    Raises:
        ValueError: Pauli rates that are not probabilities, or a depolarizing λ outside
            [0, d²/(d²-1)].
    """
    d = 2 ** len(nop.qubits)
    if not 0 <= nop.depolarizing <= d * d / (d * d - 1):
        raise ValueError(f"depolarizing = {nop.depolarizing}: must lie in [0, d²/(d²-1)] for d = {d}")
    return site_kraus(operation_errors(nop))


def operation_process_fidelity(nop: NoisyOperation) -> float:
    """F_pro of the operation's whole error channel relative to the ideal gate.

    F_pro = (1/d²) Σ_k |Tr K_k|² over :func:`error_channel_kraus` (Nielsen, Phys. Lett. A 303, 249
    (2002)). For a pure over-rotation δ on one qubit this is cos²(δ/2).
    """
    return 1.0 - operation_infidelity(nop)


def operation_infidelity(nop: NoisyOperation) -> float:
    """1 - F_pro of the operation's error channel, without cancellation for tiny errors.

    Writing K_k = a_k I + K'_k (K'_k traceless), trace preservation Σ_k Tr K_k† K_k = d gives
    F_pro = Σ_k |a_k|² = 1 - (1/d) Σ_k ||K'_k||²_F, so the infidelity is a sum of small positive
    terms: relative precision ~1e-10 even at 1e-13 per operation.
    """
    if not nop.has_coherent and not nop.has_incoherent:
        return 0.0  # no error: exactly 0, not the rounding of an identity channel
    kraus = np.array(error_channel_kraus(nop))
    d = kraus.shape[-1]
    traces = np.trace(kraus, axis1=1, axis2=2)
    traceless = kraus - (traces / d)[:, None, None] * np.eye(d)
    return float(min(1.0, math.fsum((np.abs(traceless) ** 2).ravel()) / d))


def _relaxation_infidelity(r: Relaxation) -> float:
    """1 - F_pro of T1/T2 relaxation without cancellation: (γ + 2 (1 - sqrt(1-γ) c)) / 4."""
    g, c = r.gamma, r.dephasing_factor
    if g >= 1.0 or c <= 0.0:
        one_minus_sc = 1.0
    else:
        one_minus_sc = -math.expm1(0.5 * math.log1p(-g) + math.log(c))
    return (g + 2.0 * one_minus_sc) / 4.0


def relaxation_process_fidelity(r: Relaxation) -> float:
    """F_pro of amplitude damping γ followed by pure dephasing factor c on one qubit.

    From the Kraus operators: F_pro = (2 - γ + 2 sqrt(1-γ) c)/4, so
    F_avg = (2 F_pro + 1)/3 = (3 + e^{-t/T1} + 2 e^{-t/T2})/6, the usual coherence limit.
    """
    return 1.0 - _relaxation_infidelity(r)


def naive_infidelity(circuit: NoisyCircuit) -> float:
    """The spreadsheet estimate 1 - Π F_pro over every executed operation and idle slot.

    Each operation and context error contributes the F_pro of its whole error channel, each idle
    slot that of its relaxation; repeats count with their exact multiplicity (no unrolling), summed in log space:
    1 - exp(Σ m_i log1p(-e_i)), with math.fsum, so N = 10**9 repetitions cost no more than one.
    """
    by_object: dict[ObjectKey, float] = {}
    by_channel: dict[tuple, float] = {}
    terms: list[float] = []
    for layer, mult in circuit.multiplicities():
        logs: list[float] = []
        for nop in layer.sites:
            if ObjectKey(nop) not in by_object:
                key = _channel_key(nop)
                if key not in by_channel:
                    by_channel[key] = _log_fidelity(operation_infidelity(nop))
                by_object[ObjectKey(nop)] = by_channel[key]
            logs.append(by_object[ObjectKey(nop)])
        logs.extend(_log_fidelity(_relaxation_infidelity(r)) for r in layer.idle if not r.is_trivial)
        if any(v == -math.inf for v in logs):
            return 1.0
        terms.append(mult * math.fsum(logs))
    return float(-math.expm1(math.fsum(terms))) + 0.0  # + 0.0: no -0.0 for an error-free circuit


def _channel_key(nop: NoisyOperation) -> tuple:
    """What F_pro depends on: the channel, not which qubits it acts on."""
    return (
        np.asarray(nop.coherent, dtype=complex).tobytes(),
        tuple(sorted(nop.pauli_rates.items())),
        nop.depolarizing,
        tuple((nop.qubits.index(r.qubit), r.gamma, r.dephasing_factor) for r in nop.relaxation),
    )


def _log_fidelity(infidelity: float) -> float:
    return -math.inf if infidelity >= 1.0 else math.log1p(-max(infidelity, 0.0))
