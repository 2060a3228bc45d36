"""Attaching a model to a structured circuit: timing, idle slots, families, readout, caching, and an
end-to-end check against a cirq circuit built by hand from the physics conventions."""

from __future__ import annotations

import math
import time

import cirq
import numpy as np
import pytest

from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.problems import ModelError
from tests.reference import cirq_state_infidelity

MODEL = {
    "qubits": {"t1_us": 80.0, "t2_us": 60.0, "readout_error": 0.01, "q[2]": {"t1_us": 40.0, "readout_error": 0.03}},
    "gates": {
        "sx": {"duration_ns": 25.0, "overrotation": 0.002, "avg_infidelity": 4e-4},
        "cz": {"duration_ns": 40.0, "cphase": 0.01, "z_phase": [0.001, -0.002], "avg_infidelity": 4e-3,
               "q[0],q[1]": {"cphase": 0.03}},
    },
}
NAMES = ("q[0]", "q[1]", "q[2]", "q[3]")


def circuit(*items, measured=()):
    return StructuredCircuit(NAMES, tuple(items), measured, "test.qasm")


def relax_expected(t_ns, t1_us, t2_us):
    """γ = 1 - e^{-t/T1}, c = e^{-t/Tφ}, 1/Tφ = 1/T2 - 1/(2 T1) (design §2)."""
    t1, t2 = t1_us * 1e3, t2_us * 1e3
    return 1 - math.exp(-t_ns / t1), math.exp(-t_ns * (1 / t2 - 1 / (2 * t1)))


def test_layer_duration_and_idle_slots():
    layer = Layer((Operation("sx", (0,)), Operation("cz", (1, 2))))
    noisy = attach(circuit(layer), ErrorModel.from_dict(MODEL))
    nl = noisy.body[0]
    assert nl.duration_ns == 40.0  # longest operation
    idle = {r.qubit: r for r in nl.idle}
    assert set(idle) == {0, 3}  # q0 waits 15 ns after sx; q3 idles the whole layer
    assert idle[0].duration_ns == 15.0 and idle[3].duration_ns == 40.0
    assert (idle[0].gamma, idle[0].dephasing_factor) == pytest.approx(relax_expected(15.0, 80.0, 60.0), rel=1e-12)
    sx, cz = nl.operations
    assert [r.duration_ns for r in sx.relaxation] == [25.0]
    # q[2] has its own T1 (override) and inherits T2
    r2 = next(r for r in cz.relaxation if r.qubit == 2)
    assert (r2.gamma, r2.dephasing_factor) == pytest.approx(relax_expected(40.0, 40.0, 60.0), rel=1e-12)
    # λ = r d/(d-1) (Magesan, Gambetta, Emerson, PRL 106, 180504 (2011))
    assert sx.depolarizing == pytest.approx(8e-4) and cz.depolarizing == pytest.approx(4e-3 * 4 / 3)


def test_virtual_and_absent_gates_are_ideal_and_instant():
    noisy = attach(circuit(Layer((Operation("rz", (0,), (0.3,)), Operation("h", (1,))))), ErrorModel.from_dict(MODEL))
    layer = noisy.body[0]
    assert layer.duration_ns == 0.0 and layer.idle == ()
    for nop in layer.operations:
        assert nop.hamiltonian == {} and not nop.has_incoherent and np.allclose(nop.coherent, np.eye(2))


def test_pair_table_and_families():
    model = ErrorModel.from_dict(MODEL)
    c = circuit(Layer((Operation("cz", (0, 1)), Operation("cz", (3, 2)))))
    by_gate = attach(c, model).body[0].operations
    assert [n.family for n in by_gate] == ["cz", "cz"]
    assert by_gate[0].knob_values["cphase"] == 0.03 and by_gate[1].knob_values["cphase"] == 0.01
    by_pair = attach(c, model, family_by="pair").body[0].operations
    assert [n.family for n in by_pair] == ["cz q[0],q[1]", "cz q[3],q[2]"]
    with pytest.raises(ValueError, match="family_by"):
        attach(c, model, family_by="qubit")


def test_readout_for_measured_qubits_or_all():
    model = ErrorModel.from_dict(MODEL)
    layer = Layer((Operation("sx", (0,)),))
    assert attach(circuit(layer, measured=(2, 0)), model).readout_error == {2: 0.03, 0: 0.01}
    assert attach(circuit(layer), model).readout_error == {0: 0.01, 1: 0.01, 2: 0.03, 3: 0.01}


def test_hamiltonian_and_generators_of_attached_cz():
    # cphase φ: h = φ/4 on ZI and IZ, -φ/4 on ZZ (diag(1,1,1,e^{iφ}) = e^{iφ|11><11|}, hand
    # derivation); z_phase φ_j: φ_j/2 on Z_j. All diagonal, so they add exactly.
    nop = attach(circuit(Layer((Operation("cz", (1, 2)),))), ErrorModel.from_dict(MODEL)).body[0].operations[0]
    assert nop.hamiltonian == pytest.approx({"ZI": 0.01 / 4 + 0.0005, "IZ": 0.01 / 4 - 0.001, "ZZ": -0.01 / 4}, abs=1e-15)
    assert nop.knob_generators == {"z_phase[0]": {"ZI": 0.5}, "z_phase[1]": {"IZ": 0.5},
                                   "cphase": {"ZI": 0.25, "IZ": 0.25, "ZZ": -0.25}}


def test_model_naming_a_qubit_not_in_the_circuit():
    layer = Layer((Operation("sx", (0,)),))
    typo = {"qubits": {"q[l]": {"t1_us": 10.0}}}
    with pytest.raises(ModelError) as err:
        attach(circuit(layer), ErrorModel.from_dict(typo, "fen.toml"))
    assert str(err.value).startswith('qubits."q[l]" in fen.toml: qubit \'q[l]\'') and "test.qasm" in str(err.value)
    other_register = {"gates": {"cz": {"anc[0],q[1]": {"cphase": 0.1}}}}
    with pytest.raises(ModelError, match=r'gates\.cz\."anc\[0\],q\[1\]" in fen.toml'):
        attach(circuit(layer), ErrorModel.from_dict(other_register, "fen.toml"))
    # a qubit beyond the circuit's register is refused with its key path, unless the model says it
    # describes a whole device; skipping the check passes anything
    beyond = {"qubits": {"q[7]": {"t1_us": 10.0}}}
    with pytest.raises(ModelError, match=r'^qubits\."q\[7\]" in fen\.toml: qubit \'q\[7\]\' is beyond .*device_wide = true'):
        attach(circuit(layer), ErrorModel.from_dict(beyond, "fen.toml"))
    attach(circuit(layer), ErrorModel.from_dict({**beyond, "device_wide": True}))
    with pytest.raises(ModelError, match=r"^device_wide = 'yes' in fen\.toml: expected true or false"):
        ErrorModel.from_dict({**beyond, "device_wide": "yes"}, "fen.toml")
    attach(circuit(layer), ErrorModel.from_dict(typo), check_qubits=False)


def test_structure_is_kept_and_shared():
    model = ErrorModel.from_dict(MODEL)
    body = Layer((Operation("sx", (0,)), Operation("cz", (1, 2))))
    noisy = attach(circuit(Repeat((body, Layer((Operation("sx", (0,)),))), 10**9)), model)
    rep = noisy.body[0]
    assert rep.count == 10**9
    assert rep.body[0].operations[0] is rep.body[1].operations[0]  # equal operations share one channel


def test_large_structured_circuit_attaches_fast():
    # 1000 qubits, a cz layer and an sx layer repeated 10**9 times: attach never unrolls.
    n = 1000
    names = tuple(f"q[{i}]" for i in range(n))
    cz = Layer(tuple(Operation("cz", (2 * i, 2 * i + 1)) for i in range(n // 2)))
    sx = Layer(tuple(Operation("sx", (i,)) for i in range(n)))
    c = StructuredCircuit(names, (Repeat((cz, sx), 10**9),))
    start = time.perf_counter()
    noisy = attach(c, ErrorModel.from_dict(MODEL))
    assert time.perf_counter() - start < 5.0
    assert len(noisy.distinct_layers()) == 2


def test_end_to_end_against_a_cirq_circuit_built_by_hand():
    # Reference: the same physics written directly as cirq gates and channels (rx(θ+δ), axis-turned
    # sx as PhasedXPowGate, FSimGate for cphase/swap, rz for z_phase, cirq.depolarize,
    # amplitude_damp and phase_damp with γ, c from T1/T2), simulated by cirq's DensityMatrixSimulator.
    t1, t2 = 30.0, 20.0
    model = ErrorModel.from_dict({
        "qubits": {"t1_us": t1, "t2_us": t2},
        "gates": {
            "rx": {"duration_ns": 200.0, "overrotation": 0.02, "avg_infidelity": 1e-3},
            "sx": {"duration_ns": 250.0, "axis_error": 0.04},
            "cz": {"duration_ns": 400.0, "cphase": 0.05, "swap_angle": 0.03, "z_phase": [0.01, -0.02], "avg_infidelity": 5e-3},
        },
    })
    c = StructuredCircuit(("q[0]", "q[1]"), (
        Layer((Operation("rx", (0,), (0.3,)),)),
        Repeat((Layer((Operation("cz", (0, 1)),)), Layer((Operation("sx", (1,)),))), 3),
    ))
    ours = cirq_state_infidelity(attach(c, model))

    q = cirq.LineQubit.range(2)

    def relax(qubit, t_ns):
        g, cf = relax_expected(t_ns, t1, t2)
        return [cirq.amplitude_damp(g)(qubit), cirq.phase_damp(1 - cf**2)(qubit)]

    ideal = [cirq.rx(0.3)(q[0])] + [cirq.CZ(*q), cirq.XPowGate(exponent=0.5)(q[1])] * 3
    noisy = [cirq.rx(0.32)(q[0]), cirq.depolarize(2e-3 * 3 / 4)(q[0]), *relax(q[0], 200), *relax(q[1], 200)]
    for _ in range(3):
        noisy += [cirq.CZ(*q), cirq.rz(0.01)(q[0]), cirq.rz(-0.02)(q[1]), cirq.FSimGate(0.03, -0.05)(*q),
                  cirq.depolarize(5e-3 * 4 / 3 * 15 / 16, n_qubits=2)(*q), *relax(q[0], 400), *relax(q[1], 400)]
        noisy += [cirq.PhasedXPowGate(phase_exponent=0.04 / np.pi, exponent=0.5)(q[1]), *relax(q[1], 250), *relax(q[0], 250)]
    psi = cirq.Simulator(dtype=np.complex128).simulate(cirq.Circuit(ideal), qubit_order=q).final_state_vector
    rho = cirq.DensityMatrixSimulator(dtype=np.complex128).simulate(cirq.Circuit(noisy), qubit_order=q).final_density_matrix
    theirs = float(1 - np.real(psi.conj() @ rho @ psi))
    assert ours == pytest.approx(theirs, rel=1e-9)
    assert theirs > 1e-3  # the check is not vacuous
