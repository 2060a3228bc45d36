"""The exact engine with classical branches against cirq's DensityMatrixSimulator (issue 13).

Reference: cirq's DensityMatrixSimulator on the deferred-measurement form of each circuit
(Nielsen & Chuang 2000, §4.4: a measurement is a CNOT onto a fresh ancilla that is never touched
again, feed-forward a gate controlled by that ancilla); the readout error is a bit flip of the
ancilla, the reset cirq's ResetChannel followed by a bit flip. The ancillas' diagonal is then the
exact distribution of the measurement record, with no sampling. 30+ seeded random circuits on 1-3
qubits with mid-circuit measurement, reset, feed-forward and loops, under random coherent and
incoherent knobs; record distributions and parity probabilities agree to 1e-8.
"""

from __future__ import annotations

import cirq
import numpy as np
import pytest

from budget.analysis.measured import record_infidelity
from budget.circuit.qasm import parse_qasm
from budget.engines.exact.branches import Plan, condition_bits, simulate
from budget.engines.clifford.stim_circuit import record_qubits
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.errors.noisy import NoisyIf, NoisyLayer, NoisyMeasure, NoisyRepeat, NoisyReset, Relaxation


def random_program(rng: np.random.Generator) -> tuple[str, dict]:
    """OpenQASM 3 text and an error model dict (seeded)."""
    n = int(rng.integers(1, 4))
    lines = ["OPENQASM 3;", 'include "stdgates.inc";', f"qubit[{n}] q;", "bit[8] c;"]
    bits = 0

    def gate() -> str:
        q = int(rng.integers(n))
        choice = rng.integers(5 if n > 1 else 3)
        if choice == 0:
            return f"h q[{q}];"
        if choice == 1:
            return f"rx({rng.uniform(-3, 3):.4f}) q[{q}];"
        if choice == 2:
            return f"sx q[{q}];"
        a, b = rng.choice(n, 2, replace=False)
        return f"{'cx' if choice == 3 else 'cz'} q[{a}], q[{b}];"

    loop_done = False
    while bits < 4:
        kind = rng.integers(6)
        if kind <= 1:
            lines.append(gate())
        elif kind == 2:
            lines.append(f"c[{bits}] = measure q[{int(rng.integers(n))}];")
            bits += 1
        elif kind == 3:
            lines.append(f"reset q[{int(rng.integers(n))}];")
        elif kind == 4 and bits > 0:
            b = int(rng.integers(bits))
            t = int(rng.integers(n))
            other = int(rng.integers(n))
            cond = f"c[{b}]" if rng.random() < 0.5 else f"!c[{b}]"
            lines.append(f"if ({cond}) {{ y q[{t}]; }} else {{ z q[{other}]; }}")
        elif kind == 5 and not loop_done and bits <= 2:
            q = int(rng.integers(n))
            lines.append(f"for int i in [0:1] {{ {gate()} c[{bits}] = measure q[{q}]; if (c[{bits}]) {{ y q[{q}]; }} }}")
            bits += 2  # two executed measurements
            loop_done = True
    for _ in range(2):
        lines.append(gate())
    lines.append(f"c[7] = measure q[{int(rng.integers(n))}];")
    model = {
        "qubits": {
            "t1_us": float(rng.uniform(5, 50)),
            "readout_error": float(rng.uniform(0, 0.05)),
            "reset_error": float(rng.uniform(0, 0.05)),
        },
        "gates": {
            "h": {"duration_ns": 20.0, "overrotation": float(rng.normal(0, 0.05)), "avg_infidelity": 1e-3},
            "rx": {"duration_ns": 30.0, "overrotation": float(rng.normal(0, 0.05)), "axis_error": float(rng.normal(0, 0.03))},
            "sx": {"duration_ns": 25.0, "overrotation": float(rng.normal(0, 0.05))},
            "cx": {"duration_ns": 60.0, "cphase": float(rng.normal(0, 0.05)), "avg_infidelity": 5e-3},
            "cz": {"duration_ns": 50.0, "z_phase": [float(rng.normal(0, 0.04)), 0.01]},
            # under an if only coherent errors (a controlled channel has no cirq form); zero duration
            "y": {"overrotation": float(rng.normal(0, 0.05))},
            "z": {"overrotation": float(rng.normal(0, 0.05))},
            "measure": {"duration_ns": 300.0},
            "reset": {"duration_ns": 100.0},
        },
    }
    model["qubits"]["t2_us"] = float(rng.uniform(0.5, 2.0)) * model["qubits"]["t1_us"]
    return "\n".join(lines) + "\n", model


def _relax(r: Relaxation, qs) -> list:
    if r.is_trivial:
        return []
    return [cirq.amplitude_damp(r.gamma).on(qs[r.qubit]), cirq.phase_damp(1 - r.dephasing_factor**2).on(qs[r.qubit])]


class Deferred:
    """The noisy circuit as a cirq circuit with one ancilla per recorded bit."""

    def __init__(self, noisy, num_bits: int):
        self.qs = cirq.LineQubit.range(noisy.num_qubits)
        self.anc = [cirq.NamedQubit(f"m{j:02d}") for j in range(num_bits)]
        self.ops: list = []
        self.latest: dict[str, cirq.Qid] = {}
        self.j = 0
        self.walk(noisy.body, None)

    def gate_ops(self, nop) -> list:
        t = [self.qs[q] for q in nop.qubits]
        out = [cirq.MatrixGate(nop.op.unitary()).on(*t), cirq.MatrixGate(nop.coherent).on(*t)]
        k = len(t)
        if nop.depolarizing:
            out.append(cirq.depolarize(nop.depolarizing * (4**k - 1) / 4**k, n_qubits=k).on(*t))
        for r in nop.relaxation:
            out.extend(_relax(r, self.qs))
        return out

    def walk(self, items, control) -> None:
        for it in items:
            if isinstance(it, NoisyLayer):
                for nop in it.operations:
                    ops = self.gate_ops(nop)
                    if control is not None:
                        assert not nop.has_incoherent
                        ops = [cirq.MatrixGate(nop.coherent @ nop.op.unitary()).on(*[self.qs[q] for q in nop.qubits])
                               .controlled_by(control[0], control_values=[control[1]])]
                    self.ops.extend(ops)
                for r in it.idle:
                    assert control is None
                    self.ops.extend(_relax(r, self.qs))
            elif isinstance(it, NoisyMeasure):
                for r in it.idle:
                    self.ops.extend(_relax(r, self.qs))
                for q, bit, e in zip(it.item.qubits, it.item.bits, it.readout_error):
                    a = self.anc[self.j]
                    self.j += 1
                    self.ops.append(cirq.CNOT(self.qs[q], a))
                    if e:
                        self.ops.append(cirq.bit_flip(e).on(a))
                    self.latest[bit] = a
            elif isinstance(it, NoisyReset):
                for r in it.idle:
                    self.ops.extend(_relax(r, self.qs))
                for q, e in zip(it.item.qubits, it.reset_error):
                    self.ops.append(cirq.ResetChannel().on(self.qs[q]))
                    if e:
                        self.ops.append(cirq.bit_flip(e).on(self.qs[q]))
            elif isinstance(it, NoisyRepeat):
                for _ in range(it.count):
                    self.walk(it.body, control)
            elif isinstance(it, NoisyIf):
                (bit,) = it.item.bits
                if bit not in self.latest:  # a bit never written reads 0
                    self.walk(it.then if it.item.value == 0 else it.orelse, control)
                    continue
                a = self.latest[bit]
                self.walk(it.then, (a, it.item.value))
                self.walk(it.orelse, (a, 1 - it.item.value))

    def record_distribution(self) -> np.ndarray:
        circuit = cirq.Circuit(self.ops)
        order = list(self.qs) + self.anc
        rho = cirq.DensityMatrixSimulator(dtype=np.complex128).simulate(circuit, qubit_order=order).final_density_matrix
        diag = np.real(np.diagonal(rho)).reshape(2 ** len(self.qs), 2 ** len(self.anc)).sum(axis=0)
        # ancilla m00 is the most significant bit of cirq's index; our record key has bit j = outcome j
        out = np.zeros_like(diag)
        m = len(self.anc)
        for idx, p in enumerate(diag):
            key = sum(((idx >> (m - 1 - j)) & 1) << j for j in range(m))
            out[key] += p
        return out


@pytest.mark.parametrize("seed", range(32))
def test_branches_match_cirq_deferred_measurement(seed):
    rng = np.random.default_rng(seed)
    text, model = random_program(rng)
    circuit = parse_qasm(text, source=f"random{seed}.qasm")
    noisy = attach(circuit, ErrorModel.from_dict(model))
    m = len(record_qubits(noisy))
    reference = Deferred(noisy, m).record_distribution()
    ours = simulate(noisy, Plan((), (), True, tuple(condition_bits(noisy.body)), m)).record
    mine = np.zeros(2**m)
    for r, p in ours.items():
        mine[r] += p
    assert np.max(np.abs(mine - reference)) < 1e-8
    # parities as detectors: P(parity odd) and P(some parity odd), read from cirq's distribution
    parities = [tuple(sorted(rng.choice(m, size=int(rng.integers(1, m + 1)), replace=False).tolist())) for _ in range(3)]
    det = simulate(noisy, Plan(tuple(parities), (0, 0, 0), False, tuple(condition_bits(noisy.body)), m))
    keys = np.arange(2**m)
    odd = [np.array([bin(k & sum(1 << i for i in par)).count("1") % 2 for k in keys], bool) for par in parities]
    for par_odd, p in zip(odd, det.detector_probability):
        assert abs(reference[par_odd].sum() - p) < 1e-8
    assert abs(reference[np.logical_or.reduce(odd)].sum() - det.any_fires) < 1e-8
    # the record metric itself: 1 - (Σ √(p q))² against the ideal record, from cirq's numbers
    if seed % 4:
        return
    ideal_noisy = attach(circuit, ErrorModel.from_dict({}))
    ideal_ref = Deferred(ideal_noisy, m).record_distribution()
    ideal = simulate(ideal_noisy, Plan((), (), True, tuple(condition_bits(noisy.body)), m)).record
    expected = 1 - np.sum(np.sqrt(np.clip(ideal_ref, 0, None) * np.clip(reference, 0, None))) ** 2
    assert abs(record_infidelity(ideal, ours) - expected) < 1e-8
