"""First-order content of one layer: ideal gates, Hamiltonian generators, jump operators.

Each operation's error, to first order, is a small generator (Blume-Kohout et al., "A taxonomy of
small Markovian errors", PRX Quantum 3, 020335 (2022)):

- a Hamiltonian part H_op = Σ h_P P (the exact generator of the coherent unitary,
  ``NoisyOperation.hamiltonian``), grouped by gate family (shares) or by (family, knob)
  (quadratic form);
- jump operators L at probability p (Lindblad form ρ -> ρ + p (L ρ L† - ½{L†L, ρ})):
  stochastic Pauli rates (L = P), depolarizing λ (every non-identity Pauli at λ/d²), and T1/T2
  relaxation (L = σ- = |0><1| at γ, L = Z at (1-c)/2 for the dephasing factor c);
- the first-order process infidelity of the stochastic part, Σ p_P over its Pauli rates; for
  relaxation this is the Pauli twirl p_x + p_y + p_z (Tomita & Svore, PRA 90, 062320 (2014)),
  exact for the process fidelity.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Iterable

import numpy as np

from budget.errors.fidelity import pauli_labels, pauli_matrix
from budget.errors.noisy import IDLE, NoisyLayer, NoisyOperation, Relaxation

_SIGMA_MINUS = np.array([[0, 1], [0, 0]], dtype=complex)
_Z = np.diag([1.0 + 0j, -1.0])

Grouping = Callable[[NoisyOperation], Iterable[tuple[object, dict[str, float]]]]
"""Maps an operation to (group key, Pauli generator {label: h_P}) pairs whose sum is H_op."""


def by_family(nop: NoisyOperation) -> list[tuple[object, dict[str, float]]]:
    """Group every operation's whole Hamiltonian under its family (used for shares)."""
    return [(nop.family, nop.hamiltonian)] if nop.hamiltonian else []


def pauli_sum(terms: dict[str, float]) -> np.ndarray:
    """Σ h_P P as a matrix (gate order)."""
    k = len(next(iter(terms)))
    out = np.zeros((2**k, 2**k), dtype=complex)
    for label, h in terms.items():
        out += h * pauli_matrix(label)
    return out


@dataclass(frozen=True)
class JumpSet:
    """Jump operators acting on one set of qubits (gate order).

    Attributes:
        qubits: the qubits.
        operators: shape (J, dq, dq), the jump operators L.
        rates: shape (J,), their probabilities p.
        families: family of each jump, for shares.
    """

    qubits: tuple[int, ...]
    operators: np.ndarray
    rates: np.ndarray
    families: tuple[str, ...]

    @property
    def decay(self) -> np.ndarray:
        """L†L for every jump, shape (J, dq, dq)."""
        return np.conj(np.swapaxes(self.operators, 1, 2)) @ self.operators


@dataclass(frozen=True)
class LayerContent:
    """What the first-order engines need from one layer.

    Attributes:
        gates: (ideal unitary, qubits) of each operation.
        hamiltonians: group key -> list of (local H, qubits).
        jumps: jump operators grouped by qubits.
        process_stochastic: family -> first-order process infidelity of the layer's stochastic part.
    """

    gates: tuple[tuple[np.ndarray, tuple[int, ...]], ...]
    hamiltonians: dict[object, list[tuple[np.ndarray, tuple[int, ...]]]]
    jumps: tuple[JumpSet, ...]
    process_stochastic: dict[str, float]


def _relaxation_jumps(r: Relaxation) -> list[tuple[np.ndarray, float]]:
    out = []
    if r.gamma > 0:
        out.append((_SIGMA_MINUS, r.gamma))
    if r.dephasing_factor < 1:
        out.append((_Z, (1 - r.dephasing_factor) / 2))
    return out


def _operation_jumps(nop: NoisyOperation) -> list[tuple[np.ndarray, float]]:
    out = [(pauli_matrix(label), p) for label, p in nop.pauli_rates.items() if p > 0]
    if nop.depolarizing > 0:
        k = len(nop.qubits)
        out += [(pauli_matrix(label), nop.depolarizing / 4**k) for label in pauli_labels(k)[1:]]
    return out


def _jump_set(qubits, items: list[tuple[np.ndarray, float, str]]) -> JumpSet:
    return JumpSet(
        tuple(qubits),
        np.array([m for m, _, _ in items], dtype=complex),
        np.array([p for _, p, _ in items], dtype=float),
        tuple(f for _, _, f in items),
    )


def _stochastic_process(nop_rates: dict[str, float], depol: float, k: int, relax: Iterable[Relaxation]) -> float:
    total = sum(nop_rates.values()) + depol * (4**k - 1) / 4**k
    return total + sum(sum(r.pauli_twirl()) for r in relax if not r.is_trivial)


def layer_content(layer: NoisyLayer, grouping: Grouping = by_family) -> LayerContent:
    """Collect the first-order content of one layer (see module docstring)."""
    gates = tuple((nop.op.unitary(), nop.qubits) for nop in layer.operations)
    hams: dict[object, list] = {}
    jumps: list[JumpSet] = []
    stoch: dict[str, float] = {}
    for nop in layer.operations:
        for key, terms in grouping(nop):
            if terms:
                hams.setdefault(key, []).append((pauli_sum(terms), nop.qubits))
        items = [(m, p, nop.family) for m, p in _operation_jumps(nop)]
        if items:
            jumps.append(_jump_set(nop.qubits, items))
        for r in nop.relaxation:
            if rj := _relaxation_jumps(r):
                jumps.append(_jump_set((r.qubit,), [(m, p, nop.family) for m, p in rj]))
        s = _stochastic_process(nop.pauli_rates, nop.depolarizing, len(nop.qubits), nop.relaxation)
        if s:
            stoch[nop.family] = stoch.get(nop.family, 0.0) + s
    for r in layer.idle:
        if rj := _relaxation_jumps(r):
            jumps.append(_jump_set((r.qubit,), [(m, p, IDLE) for m, p in rj]))
            stoch[IDLE] = stoch.get(IDLE, 0.0) + sum(r.pauli_twirl())
    return LayerContent(gates, hams, tuple(jumps), stoch)
