"""Independent reference: random noisy circuits and cirq's density-matrix simulator.

Nothing here uses the project's engines. A NoisyCircuit is rebuilt as a cirq circuit with explicit
channels (cirq.MatrixGate, cirq.depolarize, cirq.amplitude_damp, cirq.phase_damp, cirq.KrausChannel)
and the two metrics are computed by cirq's simulators:

- state metric: 1 - <ψ|ρ|ψ>, ρ from cirq.DensityMatrixSimulator, ψ from cirq.Simulator;
- process metric: 1 - <Φ_U|ρ_Choi|Φ_U>, the Choi state of the noisy circuit on 2n qubits against the
  ideal Choi vector (F_pro equals the Choi-state overlap; Nielsen, Phys. Lett. A 303, 249 (2002)).
"""

from __future__ import annotations

import itertools

import cirq
import numpy as np
import scipy.linalg

from budget.circuit.gates import GATES, ideal_unitary
from budget.circuit.ir import Operation
from budget.errors.noisy import (
    NoisyCircuit,
    NoisyLayer,
    NoisyOperation,
    NoisyRepeat,
    Relaxation,
)

_PAULI = {
    "I": np.eye(2, dtype=complex),
    "X": np.array([[0, 1], [1, 0]], complex),
    "Y": np.array([[0, -1j], [1j, 0]], complex),
    "Z": np.diag([1.0 + 0j, -1.0]),
}


def pauli_matrix(label: str) -> np.ndarray:
    m = np.ones((1, 1), complex)
    for ch in label:
        m = np.kron(m, _PAULI[ch])
    return m


def _random_hamiltonian(rng: np.random.Generator, k: int, scale: float) -> dict[str, float]:
    labels = ["".join(p) for p in itertools.product("IXYZ", repeat=k)][1:]
    chosen = rng.choice(len(labels), size=rng.integers(1, 4), replace=False)
    return {labels[i]: float(rng.normal(0, scale)) for i in chosen}


def _unitary_from(h: dict[str, float], k: int) -> np.ndarray:
    H = sum((c * pauli_matrix(p) for p, c in h.items()), np.zeros((2**k, 2**k), complex))
    return scipy.linalg.expm(-1j * H)


def _relax(rng: np.random.Generator, q: int, t_ns: float, incoherent: bool) -> Relaxation:
    if not incoherent or t_ns == 0:
        return Relaxation(q, t_ns, 0.0, 1.0)
    t1 = rng.uniform(20, 100) * 1e3  # ns
    t2 = rng.uniform(0.3, 2.0) * t1
    tphi_inv = 1 / t2 - 1 / (2 * t1)
    return Relaxation(q, t_ns, 1 - np.exp(-t_ns / t1), float(np.exp(-t_ns * tphi_inv)))


def random_layer(
    rng: np.random.Generator,
    n: int,
    *,
    one: list[str],
    two: list[str],
    angles,
    scale: float = 0.02,
    rates: bool = False,
    depolarizing: bool = True,
    relaxation: bool = True,
) -> NoisyLayer:
    """One random layer on n qubits: gates drawn from ``one``/``two`` (a qubit left idle with
    probability 0.2), ``angles(gate)`` for their parameters, random coherent Pauli generators of
    size ``scale``, optional stochastic Pauli rates, depolarizing and relaxation, idle slots."""
    free = list(rng.permutation(n))
    ops: list[NoisyOperation] = []
    durations: dict[int, float] = {}
    while free:
        if len(free) >= 2 and rng.random() < 0.5:
            qs, name = (int(free.pop()), int(free.pop())), str(rng.choice(two))
        else:
            qs, name = (int(free.pop()),), str(rng.choice(one))
        if rng.random() < 0.2:
            continue  # leave the qubit idle
        k = len(qs)
        params = angles(name)
        h = _random_hamiltonian(rng, k, scale) if scale else {}
        dur = float(rng.choice([20.0, 35.0, 60.0])) if relaxation else 0.0
        pr = {p: float(abs(c)) ** 2 for p, c in _random_hamiltonian(rng, k, 0.03).items()} if rates else {}
        ops.append(
            NoisyOperation(
                op=Operation(name, qs, params),
                family=name,
                coherent=_unitary_from(h, k),
                hamiltonian=h,
                pauli_rates=pr,
                depolarizing=float(rng.uniform(0, 3e-3)) if depolarizing else 0.0,
                relaxation=tuple(_relax(rng, q, dur, relaxation) for q in qs),
                duration_ns=dur,
            )
        )
        durations.update({q: dur for q in qs})
    layer_t = max(durations.values(), default=0.0)
    idle = tuple(
        _relax(rng, q, layer_t - durations.get(q, 0.0), relaxation)
        for q in range(n)
        if layer_t - durations.get(q, 0.0) > 0
    )
    return NoisyLayer(tuple(ops), idle, layer_t)


def random_noisy_circuit(
    rng: np.random.Generator,
    *,
    num_qubits: int,
    num_layers: int = 4,
    coherent_scale: float = 0.02,
    incoherent: bool = True,
    repeat_count: int | None = None,
    pauli_rates: bool = False,
) -> NoisyCircuit:
    """A random noisy circuit: random table gates, random coherent Pauli generators, random
    depolarizing and relaxation, idle slots; optionally a middle block repeated ``repeat_count``
    times (nested once when the count is even)."""
    one = [g for g, s in GATES.items() if s.num_qubits == 1]
    two = [g for g, s in GATES.items() if s.num_qubits == 2]

    def layer() -> NoisyLayer:
        return random_layer(
            rng,
            num_qubits,
            one=one,
            two=two,
            angles=lambda name: tuple(float(x) for x in rng.uniform(-np.pi, np.pi, GATES[name].num_params)),
            scale=coherent_scale,
            rates=pauli_rates and incoherent,
            depolarizing=incoherent,
            relaxation=incoherent,
        )

    body: list = [layer() for _ in range(num_layers)]
    if repeat_count is not None:
        inner = tuple(layer() for _ in range(2))
        if repeat_count % 2 == 0 and repeat_count > 2:
            block = NoisyRepeat((layer(), NoisyRepeat(inner, 2)), repeat_count // 2)
        else:
            block = NoisyRepeat(inner, repeat_count)
        body.insert(num_layers // 2, block)
    names = tuple(f"q[{i}]" for i in range(num_qubits))
    return NoisyCircuit(names, tuple(body))


def _ideal_ops(circuit: NoisyCircuit, qs) -> list[cirq.Operation]:
    out = []
    for layer in circuit.iter_layers():
        for nop in layer.operations:
            out.append(cirq.MatrixGate(nop.op.unitary()).on(*[qs[q] for q in nop.qubits]))
    return out


def _relax_ops(r: Relaxation, qs) -> list[cirq.Operation]:
    if r.is_trivial:
        return []
    return [cirq.amplitude_damp(r.gamma).on(qs[r.qubit]), cirq.phase_damp(1 - r.dephasing_factor**2).on(qs[r.qubit])]


def _channel_ops(nop, qs) -> list[cirq.Operation]:
    """The error channel of one operation (or context error) after its ideal gate, in the order of
    budget/errors/noisy.py: coherent unitary, Pauli rates, depolarizing, relaxation."""
    targets = [qs[q] for q in nop.qubits]
    k = len(targets)
    out = [cirq.MatrixGate(nop.coherent).on(*targets)]
    if nop.pauli_rates:
        p0 = 1 - sum(nop.pauli_rates.values())
        kraus = [np.sqrt(p0) * np.eye(2**k)] + [np.sqrt(p) * pauli_matrix(l) for l, p in nop.pauli_rates.items()]
        out.append(cirq.KrausChannel(kraus).on(*targets))
    if nop.depolarizing:
        d = 2**k
        out.append(cirq.depolarize(nop.depolarizing * (d * d - 1) / (d * d), n_qubits=k).on(*targets))
    for r in nop.relaxation:
        out.extend(_relax_ops(r, qs))
    return out


def _noisy_ops(circuit: NoisyCircuit, qs) -> list[cirq.Operation]:
    """Per layer (docs/error-model.md, "Context errors"): each gate then its own errors, the idle
    relaxation, then the layer's context errors in order (ideal gate the identity)."""
    out = []
    for layer in circuit.iter_layers():
        for nop in layer.operations:
            out.append(cirq.MatrixGate(nop.op.unitary()).on(*[qs[q] for q in nop.qubits]))
            out.extend(_channel_ops(nop, qs))
        for r in layer.idle:
            out.extend(_relax_ops(r, qs))
        for nop in layer.context:
            out.extend(_channel_ops(nop, qs))
    return out


def _simulate(circuit: NoisyCircuit, prefix: list, qs, order) -> tuple[np.ndarray, np.ndarray]:
    """(ideal state vector from cirq.Simulator, noisy density matrix from
    cirq.DensityMatrixSimulator) after ``prefix`` and the circuit on ``qs``, in ``order``."""
    psi = cirq.Simulator(dtype=np.complex128).simulate(
        cirq.Circuit(prefix + _ideal_ops(circuit, qs)), qubit_order=order
    ).final_state_vector
    rho = cirq.DensityMatrixSimulator(dtype=np.complex128).simulate(
        cirq.Circuit(prefix + _noisy_ops(circuit, qs)), qubit_order=order
    ).final_density_matrix
    return psi, rho


def cirq_state_infidelity(circuit: NoisyCircuit) -> float:
    """1 - <ψ|ρ|ψ> for input |0…0>, by cirq's simulators."""
    psi, rho = cirq_final_states(circuit)
    return float(1 - np.real(psi.conj() @ rho @ psi))


def cirq_process_infidelity(circuit: NoisyCircuit) -> float:
    """1 - F_pro via the Choi state on 2n qubits (system LineQubits 0..n-1, ancillas n..2n-1)."""
    n = circuit.num_qubits
    qs = cirq.LineQubit.range(n)
    anc = cirq.LineQubit.range(n, 2 * n)
    prep = [cirq.H(a) for a in anc] + [cirq.CNOT(a, q) for a, q in zip(anc, qs)]
    phi_u, rho = _simulate(circuit, prep, qs, qs + anc)
    return float(1 - np.real(phi_u.conj() @ rho @ phi_u))


def cirq_infidelity(circuit: NoisyCircuit, metric: str) -> float:
    return cirq_state_infidelity(circuit) if metric == "state" else cirq_process_infidelity(circuit)


def cirq_final_states(circuit: NoisyCircuit) -> tuple[np.ndarray, np.ndarray]:
    """(ideal ψ from cirq.Simulator, noisy ρ from cirq.DensityMatrixSimulator) for input |0…0>,
    qubit i = cirq.LineQubit(i) (added for the exact engine's observable checks)."""
    qs = cirq.LineQubit.range(circuit.num_qubits)
    return _simulate(circuit, [cirq.I(q) for q in qs], qs, qs)


def mapped(circuit: NoisyCircuit, operation, idle) -> NoisyCircuit:
    """The same circuit with ``operation(nop)`` for every operation and ``idle(layer)`` for every
    layer's idle slots; repeats kept."""

    def items(body):
        out = []
        for it in body:
            if isinstance(it, NoisyRepeat):
                out.append(NoisyRepeat(items(it.body), it.count))
                continue
            out.append(NoisyLayer(tuple(map(operation, it.operations)), idle(it), it.duration_ns,
                                  tuple(map(operation, it.context))))
        return tuple(out)

    return NoisyCircuit(circuit.qubits, items(circuit.body), circuit.readout_error, circuit.source)


def scaled_incoherent(circuit: NoisyCircuit, factor: float) -> NoisyCircuit:
    """The same circuit with every incoherent probability scaled by ``factor`` (depolarizing λ,
    Pauli rates, amplitude damping γ, and 1 - c for the dephasing factor c); repeats kept. Keeps
    random circuits inside the range where a first-order method is meant to hold."""
    import dataclasses

    def relax(r: Relaxation) -> Relaxation:
        return dataclasses.replace(r, gamma=r.gamma * factor, dephasing_factor=1 - (1 - r.dephasing_factor) * factor)

    def operation(nop):
        return dataclasses.replace(
            nop,
            depolarizing=nop.depolarizing * factor,
            pauli_rates={k: v * factor for k, v in nop.pauli_rates.items()},
            relaxation=tuple(map(relax, nop.relaxation)),
        )

    return mapped(circuit, operation, lambda layer: tuple(map(relax, layer.idle)))
