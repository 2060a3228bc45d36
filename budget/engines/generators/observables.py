"""First-order error of Pauli observables <O> on the output of input |0…0>.

Coherent part (exponentiated, as for the infidelity): <χ|O|χ> - <ψ|O|ψ> with χ = e^{-iH_total} ψ,
i.e. to first order i<ψ|[H_total, O]|ψ>.

Incoherent part, Heisenberg picture: a jump L at probability p acting when the ideal state is ψ_t
changes the final <O> by p <ψ_t| L† O_t L - ½{L†L, O_t} |ψ_t> to first order, O_t = R_t† O R_t
the observable pulled back to that time (for a Pauli L: -2p <O_t^->, the part of O_t that
anticommutes with L). O_t is carried backwards as a dense matrix, O <- U† O U per layer, together
with ψ_t <- U† ψ_t. Repeated blocks are run repetition by repetition (N <= EXPLICIT_REPEATS), or on
evenly spaced sampled repetitions scaled by N (reported as an approximation).
"""

from __future__ import annotations

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.matrices.apply import apply, apply_gate, conjugate
from budget.engines.generators.dense import ContentOf, DensePropagator
from budget.engines.generators.jumps import repetitions
from budget.errors.noisy import NoisyItem, NoisyRepeat
from budget.pauli_algebra import pauli_matrix


def observable_vector(letters: dict[int, str], v: np.ndarray, num_qubits: int) -> np.ndarray:
    """O v for the Pauli observable ``letters`` (qubit -> letter)."""
    for q, letter in letters.items():
        v = apply_gate(v, pauli_matrix(letter), (q,), num_qubits)
    return v


class IncoherentObservables:
    """Sums the first-order incoherent change of <O> (see module docstring)."""

    def __init__(self, num_qubits: int, content_of: ContentOf, dense: DensePropagator) -> None:
        self.n = num_qubits
        self.content_of = content_of
        self.dense = dense
        self.approximations: list[str] = []

    def change(self, body: tuple[NoisyItem, ...], letters: dict[int, str], psi_final: np.ndarray) -> float:
        d = 2**self.n
        o = observable_vector(letters, np.eye(d, dtype=complex), self.n).T.copy()
        total, _, _ = self._backward(body, psi_final, o)
        return total

    def _backward(self, items, psi: np.ndarray, o: np.ndarray) -> tuple[float, np.ndarray, np.ndarray]:
        total = 0.0
        for item in reversed(items):
            if gate_kind(item, "generators engine") is Kind.LAYER:
                c = self.content_of(item)
                for js in c.jumps:
                    o_psi = o @ psi
                    for op, dec, p in zip(js.operators, js.decay, js.rates):
                        lpsi = apply_gate(psi, op, js.qubits, self.n)
                        ddpsi = apply_gate(psi, dec, js.qubits, self.n)
                        total += p * (np.vdot(lpsi, o @ lpsi).real - np.vdot(ddpsi, o_psi).real)
                for g in reversed(c.gate_list):
                    adj = g.adjoint()
                    psi = apply(psi, adj, self.n)
                    o = conjugate(o, adj, self.n)
            else:
                total_r, psi, o = self._repeat(item, psi, o)
                total += total_r
        return total, psi, o

    def _repeat(self, item: NoisyRepeat, psi: np.ndarray, o: np.ndarray) -> tuple[float, np.ndarray, np.ndarray]:
        _, basis = self.dense.repeat(item)
        n_rep = item.count
        reps, exact = repetitions(n_rep)
        total = 0.0
        if exact:
            for _ in range(n_rep):
                t, psi, o = self._backward(item.body, psi, o)
                total += t
            return total, psi, o
        for k, w in reps:
            back = n_rep - 1 - k  # cycles between the end of repetition k and the end of the block
            p = basis.power(-back)
            t, _, _ = self._backward(item.body, p @ psi, p @ o @ p.conj().T)
            total += w * t
        self.approximations.append(
            f"the incoherent observable error inside a block repeated {n_rep} times was estimated "
            f"from {len(reps)} evenly spaced repetitions"
        )
        p = basis.power(-n_rep)
        return total, p @ psi, p @ o @ p.conj().T

