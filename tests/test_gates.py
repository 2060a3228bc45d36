"""Every gate of the table equals cirq's gate of the same name (cirq's gate library is the
reference: the project writes its matrices from the textbook definitions to avoid importing cirq)."""

import cirq
import numpy as np
import pytest

from budget.circuit.gates import GATES, ideal_unitary, overrotation_unitary

ANGLES = (0.37, -1.2, 2.9)

CIRQ = {
    "id": lambda: cirq.I,
    "x": lambda: cirq.X,
    "y": lambda: cirq.Y,
    "z": lambda: cirq.Z,
    "h": lambda: cirq.H,
    "s": lambda: cirq.S,
    "sdg": lambda: cirq.S**-1,
    "t": lambda: cirq.T,
    "tdg": lambda: cirq.T**-1,
    "sx": lambda: cirq.XPowGate(exponent=0.5),
    "sxdg": lambda: cirq.XPowGate(exponent=-0.5),
    "rx": lambda t: cirq.rx(t),
    "ry": lambda t: cirq.ry(t),
    "rz": lambda t: cirq.rz(t),
    "p": lambda t: cirq.ZPowGate(exponent=t / np.pi),
    "u1": lambda t: cirq.ZPowGate(exponent=t / np.pi),
    "u2": lambda phi, lam: cirq.circuits.qasm_output.QasmUGate(0.5, phi / np.pi, lam / np.pi),
    "u3": lambda th, phi, lam: cirq.circuits.qasm_output.QasmUGate(th / np.pi, phi / np.pi, lam / np.pi),
    "u": lambda th, phi, lam: cirq.circuits.qasm_output.QasmUGate(th / np.pi, phi / np.pi, lam / np.pi),
    "cx": lambda: cirq.CNOT,
    "cy": lambda: cirq.ControlledGate(cirq.Y),
    "cz": lambda: cirq.CZ,
    "swap": lambda: cirq.SWAP,
    "iswap": lambda: cirq.ISWAP,
    "cp": lambda t: cirq.CZPowGate(exponent=t / np.pi),
    "cu1": lambda t: cirq.CZPowGate(exponent=t / np.pi),
    "crz": lambda t: cirq.ControlledGate(cirq.rz(t)),
    "rzz": lambda t: cirq.ZZPowGate(exponent=t / np.pi, global_shift=-0.5),
}


def test_every_table_gate_has_a_reference():
    assert set(GATES) == set(CIRQ)


@pytest.mark.parametrize("name", sorted(GATES))
def test_matrix_equals_cirq(name):
    params = ANGLES[: GATES[name].num_params]
    ours = ideal_unitary(name, params)
    theirs = cirq.unitary(CIRQ[name](*params))
    if name in ("u2", "u3", "u"):  # cirq's QasmUGate carries the OpenQASM 2 global phase
        k = np.vdot(theirs.ravel(), ours.ravel())
        theirs = theirs * k / abs(k)
    np.testing.assert_allclose(ours, theirs, atol=1e-12)


@pytest.mark.parametrize("name", [g for g, s in GATES.items() if s.rotation_generator is not None])
def test_fixed_gate_is_a_rotation_about_its_generator(name):
    # over-rotation of a fixed gate = exp(-i δ K): the gate itself must be exp(-i θ K) for some θ
    # (up to global phase), so that δ really lengthens its own rotation
    g = ideal_unitary(name)
    k = GATES[name].rotation_generator
    assert np.allclose(g @ k, k @ g, atol=1e-12)
    e = overrotation_unitary(name, (), 0.2)
    np.testing.assert_allclose(e @ e.conj().T, np.eye(len(e)), atol=1e-12)


def test_parametrised_overrotation_shifts_the_angle():
    # rx: Rx(θ+δ) Rx(θ)† = Rx(δ) (cirq reference)
    np.testing.assert_allclose(overrotation_unitary("rx", (0.7,), 0.05), cirq.unitary(cirq.rx(0.05)), atol=1e-12)
