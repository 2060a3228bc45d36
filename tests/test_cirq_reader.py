"""cirq reader (objects and JSON files), checked against cirq's own unitaries."""

from __future__ import annotations

import numpy as np
import pytest
import sympy

import cirq
from budget.circuit.cirq_reader import from_cirq, read_cirq_json, table_gate
from budget.circuit.ir import Layer, Repeat
from budget.circuit.load import load_circuit
from budget.problems import CircuitSyntaxError, InputError
from tests.circuit_reference import assert_same_unitary, unitary_of

Q = cirq.LineQubit.range(4)


@pytest.mark.parametrize(
    "gate, name, params",
    [
        (cirq.CZ, "cz", ()),
        (cirq.CNOT, "cx", ()),
        (cirq.X, "x", ()),
        (cirq.X**-1, "x", ()),
        (cirq.H, "h", ()),
        (cirq.S**-1, "sdg", ()),
        (cirq.T, "t", ()),
        (cirq.X**0.5, "sx", ()),
        (cirq.SWAP, "swap", ()),
        (cirq.ISWAP, "iswap", ()),
        (cirq.ControlledGate(cirq.Y), "cy", ()),
        (cirq.I, "id", ()),
        (cirq.rx(0.3), "rx", (0.3,)),
        (cirq.ry(-1.2), "ry", (-1.2,)),
        (cirq.rz(2.0), "rz", (2.0,)),
        (cirq.X**0.3, "rx", (0.3 * np.pi,)),  # equal up to global phase
        (cirq.Z**0.3, "p", (0.3 * np.pi,)),
        (cirq.CZ**0.5, "cp", (0.5 * np.pi,)),
        (cirq.ZZ**0.2, "rzz", (0.2 * np.pi,)),
    ],
)
def test_table_recognition(gate, name, params):
    found = table_gate(gate)
    assert found is not None and found[0] == name
    np.testing.assert_allclose(found[1], params, atol=1e-12)


@pytest.mark.parametrize(
    "gate", [cirq.PhasedXPowGate(phase_exponent=0.25, exponent=0.5), cirq.FSimGate(0.3, 0.1), cirq.CX**0.5]
)
def test_other_gates_fall_back_to_unitary(gate):
    assert table_gate(gate) is None
    c = from_cirq(cirq.Circuit(gate.on(*Q[: cirq.num_qubits(gate)])))
    (op,) = c.body[0].operations
    assert op.gate == "unitary" and op.label == str(gate)
    np.testing.assert_allclose(op.unitary(), cirq.unitary(gate))


def test_moments_become_layers_and_names():
    a, b = cirq.GridQubit(0, 1), cirq.NamedQubit("anc")
    circuit = cirq.Circuit(
        cirq.Moment([cirq.H(a), cirq.X(b)]),
        cirq.Moment([cirq.CZ(a, b)]),
        cirq.Moment([cirq.measure(a, b, key="m")]),
    )
    c = from_cirq(circuit)
    assert c.source == "<cirq.Circuit>"
    assert c.qubits == tuple(str(q) for q in sorted(circuit.all_qubits()))  # cirq's own order
    assert "q(0, 1)" in c.qubits and "anc" in c.qubits
    assert [len(layer.operations) for layer in c.body] == [2, 1]  # measurement is the readout
    assert c.measured == (0, 1)


@pytest.mark.parametrize("seed", range(4))
def test_random_circuits_unitary_matches_cirq(seed):
    """Random circuits over a gate set that includes three-qubit gates (CCX, CSWAP, CCZ)."""
    gates = {cirq.X: 1, cirq.H: 1, cirq.T: 1, cirq.rx(0.4): 1, cirq.CZ: 2, cirq.ISWAP**0.5: 2,
             cirq.CCX: 3, cirq.CSWAP: 3, cirq.CCZ: 3, cirq.Z**0.2: 1}
    circuit = cirq.testing.random_circuit(Q, n_moments=8, op_density=0.7, gate_domain=gates, random_state=seed)
    c = from_cirq(circuit)
    assert_same_unitary(unitary_of(c), circuit.unitary(qubit_order=sorted(circuit.all_qubits())))


def test_ccx_in_a_moment_uses_table_decomposition():
    circuit = cirq.Circuit(cirq.Moment([cirq.CCX(*Q[:3]), cirq.X(Q[3])]))
    c = from_cirq(circuit)
    assert c.executed_counts()[0] == 15 + 1
    assert {op.gate for layer in c.body for op in layer.operations} == {"h", "cx", "t", "tdg", "x"}
    np.testing.assert_allclose(unitary_of(c), circuit.unitary(qubit_order=Q), atol=1e-10)


def _repeated_circuit(reps_outer: int, reps_inner: int) -> cirq.Circuit:
    inner = cirq.FrozenCircuit(cirq.rx(0.1)(Q[0]), cirq.CZ(Q[0], Q[1]))
    outer = cirq.FrozenCircuit(
        cirq.H(Q[1]),
        cirq.CircuitOperation(inner, repetitions=reps_inner),
        cirq.ry(0.2)(Q[2]),
    )
    return cirq.Circuit(
        cirq.X(Q[0]),
        cirq.CircuitOperation(outer, repetitions=reps_outer),
        cirq.measure(*Q[:3], key="m"),
    )


def test_circuit_operation_becomes_nested_repeat():
    circuit = _repeated_circuit(3, 2)
    c = from_cirq(circuit)
    first, rep = c.body
    assert isinstance(first, Layer) and [(o.gate, o.qubits) for o in first.operations] == [("x", (0,))]
    assert isinstance(rep, Repeat) and rep.count == 3
    inner = [it for it in rep.body if isinstance(it, Repeat)]
    assert len(inner) == 1 and inner[0].count == 2
    assert c.measured == (0, 1, 2)
    ref = cirq.drop_terminal_measurements(circuit).unitary(qubit_order=Q[:3])
    assert_same_unitary(unitary_of(c), ref)


def test_json_round_trip_keeps_repeats(tmp_path):
    path = tmp_path / "c.json"
    cirq.to_json(_repeated_circuit(3, 2), path)
    c = load_circuit(path)
    assert c.source == str(path)
    assert isinstance(c.body[1], Repeat) and c.body[1].count == 3
    assert c.executed_counts() == from_cirq(_repeated_circuit(3, 2)).executed_counts()
    big = tmp_path / "big.json"
    cirq.to_json(_repeated_circuit(10**9, 1000), big)
    ops, _ = load_circuit(big).executed_counts()
    assert ops == 1 + 10**9 * (1 + 1000 * 2 + 1)


def test_circuit_operation_qubit_map_and_inverse():
    sub = cirq.FrozenCircuit(cirq.T(Q[0]), cirq.CNOT(Q[0], Q[1]))
    op = cirq.CircuitOperation(sub, repetitions=-2, qubit_map={Q[0]: Q[3], Q[1]: Q[2]})
    circuit = cirq.Circuit(cirq.H(Q[3]), op)
    c = from_cirq(circuit)
    assert isinstance(c.body[1], Repeat) and c.body[1].count == 2
    assert_same_unitary(unitary_of(c), circuit.unitary(qubit_order=sorted(circuit.all_qubits())))


@pytest.mark.parametrize(
    "circuit, words",
    [
        (cirq.Circuit(cirq.amplitude_damp(0.1)(Q[0])), ["moment 0", "not unitary"]),
        (
            cirq.Circuit(cirq.measure(Q[0], Q[1], key="m"), cirq.X(Q[2]).with_classical_controls("m")),
            ["moment 1", "one qubit"],
        ),
        (cirq.Circuit(cirq.measure(Q[0], invert_mask=(True,))), ["moment 0", "inversion mask"]),
        (cirq.Circuit(cirq.depolarize(0.01)(Q[0])), ["not unitary", "error model"]),
        (cirq.Circuit(cirq.rx(sympy.Symbol("a"))(Q[0])), ["unresolved parameters"]),
    ],
)
def test_bad_cirq_input(circuit, words):
    with pytest.raises(CircuitSyntaxError) as err:
        from_cirq(circuit)
    msg = str(err.value)
    assert msg.startswith("<cirq.Circuit>: moment ")
    for w in words:
        assert w in msg, msg


def test_bad_json_files(tmp_path):
    broken = tmp_path / "broken.json"
    broken.write_text('{\n  "cirq_type": "Circuit",\n  "moments": [\n}\n')
    with pytest.raises(CircuitSyntaxError, match=f"^{broken}:4: invalid JSON"):
        read_cirq_json(broken)
    not_circuit = tmp_path / "gate.json"
    cirq.to_json(cirq.X, not_circuit)
    with pytest.raises(CircuitSyntaxError, match="expected a cirq.Circuit"):
        read_cirq_json(not_circuit)
    with pytest.raises(InputError, match="nope.json: circuit file not found"):
        read_cirq_json(tmp_path / "nope.json")


def test_duplicate_display_names_rejected():
    with pytest.raises(InputError, match="display name 'q\\(0\\)'"):
        from_cirq(cirq.Circuit(cirq.X(cirq.LineQubit(0)), cirq.X(cirq.NamedQubit("q(0)"))))
