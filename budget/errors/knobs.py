"""Coherent knobs: named knobs -> an operation's unitary, Hamiltonian and unit generators, and the
(family, knob) rows a circuit's operations form.

Each knob is a unitary applied right after the ideal gate G (design.md §2, all angles in radians):

- ``overrotation`` δ: exp(-i δ K) about the gate's own axis, or the first angle shifted
  (:func:`budget.circuit.gates.overrotation_unitary`);
- ``axis_error`` α (XY-plane rotations): actual gate Rz(α) G Rz(-α), error Rz(α) G Rz(-α) G†;
- ``z_phase`` φ_j: exp(-i φ_j Z_j / 2) on each qubit j;
- ``cphase`` φ: diag(1, 1, 1, e^{iφ});
- ``swap_angle`` θ: exp(-i θ (XX+YY)/2), the fSim θ convention;
- ``pauli`` {P: h_P}: exp(-i Σ h_P P).

They compose, rightmost first after the gate, as
U_coh = U_pauli · U_swap · U_cphase · U_zphase · U_axis · U_overrot.
The Hamiltonian is exact (H with U_coh = e^{-iH} up to global phase, principal logarithm); each
knob's generator is the derivative of that Hamiltonian in the knob alone at zero error, so to first
order H ≈ Σ_k value_k · generator_k (Blume-Kohout et al., PRX Quantum 3, 020335 (2022)).

Rows (design.md §5). The quadratic form and the retuned circuits have one row per (family, knob)
with value δ: the value all of the family's operations share, or the largest in magnitude when they
differ. Each operation enters that row with its generator scaled by value_op / δ, so δ times the
row's propagated generator is exactly the family's first-order Hamiltonian for that knob (δ = 0:
unit generators, for sensitivity only). Operations with a Hamiltonian but no knob generators form
the knob ``"pauli"`` (:data:`PLAIN_KNOB`) with δ = 1.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import reduce
from typing import Callable

import numpy as np

from budget.circuit.gates import ideal_unitary, overrotation_unitary
from budget.errors.noisy import NoisyCircuit, NoisyOperation
from budget.errors.params import GateParams
from budget.pauli_algebra import Z as _Z
from budget.pauli_algebra import pauli_decompose, pauli_hamiltonian, pauli_unitary
_PROBE_RAD = 0.0625  # over-rotation probe: H(δ) = δ K exactly for every table gate (one-parameter group)


@dataclass(frozen=True)
class CoherentError:
    """Coherent error of one gate with one parameter set.

    Attributes:
        unitary: U_coh (gate order, first qubit most significant).
        hamiltonian: Pauli label -> h_P, U_coh = exp(-i Σ h_P P) up to global phase.
        generators: knob name -> {label: h_P per radian}.
        values: knob name -> value in radians.
    """

    unitary: np.ndarray
    hamiltonian: dict[str, float]
    generators: dict[str, dict[str, float]]
    values: dict[str, float]


def rz(angle_rad: float) -> np.ndarray:
    """exp(-i θ Z/2)."""
    return np.diag([np.exp(-0.5j * angle_rad), np.exp(0.5j * angle_rad)])


def swap_unitary(theta_rad: float) -> np.ndarray:
    """exp(-i θ (XX+YY)/2): the fSim(θ, 0) exchange block on |01>, |10>."""
    c, s = np.cos(theta_rad), -1j * np.sin(theta_rad)
    return np.array([[1, 0, 0, 0], [0, c, s, 0], [0, s, c, 0], [0, 0, 0, 1]], dtype=complex)


def _traceless(matrix: np.ndarray) -> dict[str, float]:
    return {
        label: float(c.real)
        for label, c in pauli_decompose(matrix).items()
        if set(label) != {"I"} and abs(c.real) >= 1e-15
    }


def _scaled(h: dict[str, float], factor: float) -> dict[str, float]:
    return {p: c * factor for p, c in h.items() if abs(c * factor) >= 1e-15}


def coherent_error(gate: str, params: tuple[float, ...], gp: GateParams, num_qubits: int) -> CoherentError:
    """Build the coherent error of ``gate(params)`` from its knobs (see module docstring).

    Gates without knobs (including fallback ``unitary`` gates) get the identity.
    """
    d = 2**num_qubits
    values = gp.knob_values()
    if not values:
        return CoherentError(np.eye(d, dtype=complex), {}, {}, {})
    factors: list[np.ndarray] = []  # applied in this order (rightmost first in the product)
    gens: dict[str, dict[str, float]] = {}
    if gp.overrotation is not None:
        factors.append(overrotation_unitary(gate, params, gp.overrotation))
        probe = pauli_hamiltonian(overrotation_unitary(gate, params, _PROBE_RAD), tol=0.0)
        gens["overrotation"] = _scaled(probe, 1 / _PROBE_RAD)
    if gp.axis_error is not None:
        g = ideal_unitary(gate, params)
        a = gp.axis_error
        factors.append(rz(a) @ g @ rz(-a) @ g.conj().T)
        gens["axis_error"] = _traceless((_Z - g @ _Z @ g.conj().T) / 2)
    if gp.z_phase is not None:
        factors.append(reduce(np.kron, [rz(phi) for phi in gp.z_phase]))
        for j in range(num_qubits):
            name = "z_phase" if num_qubits == 1 else f"z_phase[{j}]"
            gens[name] = {"I" * j + "Z" + "I" * (num_qubits - j - 1): 0.5}
    if gp.cphase is not None:
        factors.append(np.diag([1, 1, 1, np.exp(1j * gp.cphase)]).astype(complex))
        gens["cphase"] = {"ZI": 0.25, "IZ": 0.25, "ZZ": -0.25}
    if gp.swap_angle is not None:
        factors.append(swap_unitary(gp.swap_angle))
        gens["swap_angle"] = {"XX": 0.5, "YY": 0.5}
    if gp.pauli:
        factors.append(pauli_unitary(gp.pauli))
        gens.update({f"pauli:{label}": {label: 1.0} for label, _ in gp.pauli})
    u = reduce(lambda acc, f: f @ acc, factors, np.eye(d, dtype=complex))
    return CoherentError(u, pauli_hamiltonian(u), gens, values)


PLAIN_KNOB = "pauli"
"""Knob name of an operation with a Hamiltonian but no knob generators."""

Grouping = Callable[[NoisyOperation], list[tuple[object, dict[str, float]]]]
"""Maps an operation to (row key, Pauli generator {label: h_P}) pairs whose sum is its Hamiltonian."""


def knob_terms(nop: NoisyOperation) -> list[tuple[str, dict[str, float], float]]:
    """(knob, unit generator, value in rad) of each of the operation's knobs; an operation with a
    Hamiltonian but no knobs gives (``"pauli"``, its Hamiltonian, 1.0)."""
    if nop.knob_generators:
        return [(k, g, float(nop.knob_values.get(k, 0.0))) for k, g in nop.knob_generators.items()]
    if nop.hamiltonian:
        return [(PLAIN_KNOB, nop.hamiltonian, 1.0)]
    return []


def knob_grouping(circuit: NoisyCircuit) -> tuple[Grouping, dict[tuple[str, str], float]]:
    """(grouping for :func:`budget.engines.matrices.channels.layer_content`, (family, knob) -> δ in
    rad), rows as in the module docstring."""
    values: dict[tuple[str, str], float] = {}
    for layer in circuit.distinct_layers():
        for nop in layer.sites:
            for knob, _, v in knob_terms(nop):
                key = (nop.family, knob)
                if key not in values or abs(v) > abs(values[key]):
                    values[key] = v

    def grouping(nop: NoisyOperation) -> list[tuple[object, dict[str, float]]]:
        out = []
        for knob, gen, v in knob_terms(nop):
            key = (nop.family, knob)
            scale = v / values[key] if values[key] else 1.0
            out.append((key, {p: c * scale for p, c in gen.items()}))
        return out

    return grouping, values
