"""Test helpers for the clifford engine: random noisy Clifford circuits and a dense first-order
reference that uses none of the engine's code.

The reference pushes every error term through the ideal circuit with dense matrices built by cirq
(cirq.MatrixGate on LineQubits, cirq.Circuit.unitary) and evaluates the generator formulas of
Blume-Kohout et al., "A taxonomy of small Markovian errors", PRX Quantum 3, 020335 (2022):

    process:  e_F = Tr(H²)/d + Σ p,          H = Σ_t h_t S_t P_t S_t†
    state:    1 - F = Var_ψ(H) + Σ p (1 - <ψ|Q|ψ>²),   ψ = U|0…0>
    observable O: δ<O> = i<ψ|[H, O]|ψ> - 2 Σ_{Q anticommuting with O} p <ψ|O|ψ>

with stochastic rates from pauli_rates, depolarizing λ (λ/d² per Pauli) and the Pauli twirl of
relaxation (Tomita & Svore, PRA 90, 062320 (2014)).
"""

from __future__ import annotations

import itertools

import cirq
import numpy as np

from budget.errors.noisy import IDLE, NoisyCircuit, NoisyLayer, NoisyRepeat
from reference import _relax, pauli_matrix
from reference import random_layer as _random_layer

ONE = ["id", "x", "y", "z", "h", "s", "sdg", "sx", "sxdg", "rx", "ry", "rz", "p", "u"]
TWO = ["cx", "cy", "cz", "swap", "iswap"]
ANGLES = {"rx": 1, "ry": 1, "rz": 1, "p": 1, "u": 3}


def _labels(k: int) -> list[str]:
    return ["".join(p) for p in itertools.product("IXYZ", repeat=k)][1:]


def random_layer(rng, n: int, *, scale=0.02, depolarizing=True, relaxation=True, rates=False) -> NoisyLayer:
    """A random layer of Clifford gates (rotation angles at multiples of π/2)."""
    return _random_layer(
        rng,
        n,
        one=ONE,
        two=TWO,
        angles=lambda gate: tuple(float(a) for a in rng.integers(-4, 5, ANGLES.get(gate, 0)) * np.pi / 2),
        scale=scale,
        rates=rates,
        depolarizing=depolarizing,
        relaxation=relaxation,
    )


def random_clifford_circuit(rng, n: int, *, layers: int = 4, repeat: int | None = None, nested: bool = False, **kw) -> NoisyCircuit:
    """Random Clifford layers with random errors; optionally a repeated block (nested once)."""
    body: list = [random_layer(rng, n, **kw) for _ in range(layers)]
    if repeat is not None:
        inner = tuple(random_layer(rng, n, **kw) for _ in range(2))
        block = NoisyRepeat((random_layer(rng, n, **kw), NoisyRepeat(inner, 3)), repeat) if nested else NoisyRepeat(inner, repeat)
        body.insert(layers // 2, block)
    return NoisyCircuit(tuple(f"q[{i}]" for i in range(n)), tuple(body))


def unrolled(c: NoisyCircuit) -> NoisyCircuit:
    return NoisyCircuit(c.qubits, tuple(c.iter_layers()), source=c.source)


def _embed(label: str, qubits: tuple[int, ...], n: int) -> np.ndarray:
    qs = cirq.LineQubit.range(n)
    ps = cirq.PauliString({qs[q]: getattr(cirq, ch) for q, ch in zip(qubits, label) if ch != "I"})
    return ps.matrix(qs)


def _terms(layer: NoisyLayer):
    """(family, kind, label, qubits, value) of every error term of a layer."""
    for nop in layer.operations:
        k = len(nop.qubits)
        for lab, h in nop.hamiltonian.items():
            yield nop.family, "h", lab, nop.qubits, h
        for lab, p in nop.pauli_rates.items():
            yield nop.family, "s", lab, nop.qubits, p
        for lab in _labels(k) if nop.depolarizing else ():
            yield nop.family, "s", lab, nop.qubits, nop.depolarizing / 4**k
        for r in nop.relaxation:
            for lab, p in zip("XYZ", r.pauli_twirl()):
                yield nop.family, "s", lab, (r.qubit,), p
    for r in layer.idle:
        for lab, p in zip("XYZ", r.pauli_twirl()):
            yield IDLE, "s", lab, (r.qubit,), p


def dense_first_order(c: NoisyCircuit, observables: tuple[str, ...] = ()) -> dict:
    """First-order process and state infidelity, family shares and observable errors, densely."""
    n = c.num_qubits
    d = 2**n
    qs = cirq.LineQubit.range(n)
    layers = list(c.iter_layers())
    mats = [
        cirq.Circuit(
            [cirq.I(q) for q in qs] + [cirq.MatrixGate(nop.op.unitary()).on(*[qs[q] for q in nop.qubits]) for nop in layer.operations]
        ).unitary(qubit_order=qs)
        for layer in layers
    ]
    suffix = [np.eye(d, dtype=complex)] * (len(layers) + 1)
    for t in range(len(layers) - 1, -1, -1):
        suffix[t] = suffix[t + 1] @ mats[t]
    psi = suffix[0][:, 0]
    hams: dict[str, np.ndarray] = {}
    stoch: list[tuple[str, float, np.ndarray]] = []
    for t, layer in enumerate(layers):
        s = suffix[t + 1]
        for fam, kind, lab, qubits, v in _terms(layer):
            q = s @ _embed(lab, qubits, n) @ s.conj().T
            if kind == "h":
                hams[fam] = hams.get(fam, 0) + v * q
            else:
                stoch.append((fam, v, q))
    total = sum(hams.values(), np.zeros((d, d), complex))
    out = {"process": {}, "state": {}}
    ev = lambda m: complex(psi.conj() @ m @ psi)  # noqa: E731
    for fam, hf in hams.items():
        out["process"][fam] = out["process"].get(fam, 0) + np.trace(hf @ total).real / d
        out["state"][fam] = out["state"].get(fam, 0) + (ev(hf @ total) - ev(hf) * ev(total)).real
    for fam, p, q in stoch:
        out["process"][fam] = out["process"].get(fam, 0) + p
        out["state"][fam] = out["state"].get(fam, 0) + p * (1 - ev(q).real ** 2)
    result = {
        "process": sum(out["process"].values()),
        "state": sum(out["state"].values()),
        "shares": out,
        "observables": {},
    }
    for label in observables:
        from budget.engines.base import parse_observable

        paulis = parse_observable(label, n)
        o = _embed("".join(paulis.values()), tuple(paulis), n)
        delta = (1j * ev(total @ o - o @ total)).real
        for _, p, q in stoch:
            if np.allclose(q @ o, -o @ q):
                delta -= 2 * p * ev(o).real
        result["observables"][label] = delta
    return result
