"""Context sections name qubits the way the circuit does, brackets and commas included.

cirq's grid qubits are named ``q(1, 2)`` (docs/circuit-formats.md): the comma inside the name must
not split a ``[couplings."A,B"]`` pair, a ``with`` operation or a ``[[context]]`` ``qubits`` key. A
context table's family is ``gate [name]`` (docs/error-model.md): the terminal must show the
brackets, and an error message that names such a key must keep them.
"""

from __future__ import annotations

import math

import cirq
import numpy as np
from typer.testing import CliRunner

from budget.analysis.run import analyze
from budget.cli import app

runner = CliRunner()
A, B, C = cirq.GridQubit(0, 0), cirq.GridQubit(1, 0), cirq.GridQubit(0, 1)
MODEL = {
    "gates": {"sx": {"duration_ns": 30.0}, "x": {"duration_ns": 50.0}, "cz": {"duration_ns": 60.0}},
    "couplings": {"q(0, 0),q(1, 0)": {"zz_khz": 100.0}},
    "context": [{"name": "beside x", "gate": "cz", "qubits": "q(0, 0),q(0, 1)", "with": ["x q(1, 0)"],
                 "cphase": 0.02}],
}


def _circuit() -> cirq.Circuit:
    return cirq.Circuit([
        cirq.Moment([cirq.X(A) ** 0.5, cirq.X(B)]),
        cirq.Moment([cirq.CZ(A, C), cirq.X(B)]),
        cirq.Moment([cirq.X(A), cirq.X(C) ** 0.5]),
    ])


def test_cirq_grid_names_in_couplings_and_context_against_cirq_unitary():
    # Independent reference: the same circuit in cirq with the errors written out as gates
    # (issue 14's convention): after each layer of duration T in which a,b do not run a gate
    # together, diag(1,1,1,e^{iφ}) = CZPowGate(exponent=φ/π) with φ = 2π·ζ·T; the cz of the
    # context table carries cphase 0.02 = diag(1,1,1,e^{0.02 i}) after the cz.
    zeta_per_ns = 100e3 * 1e-9
    layers_ns = (50.0, 60.0, 50.0)  # each layer lasts as long as its longest gate
    ideal = _circuit()
    noisy = cirq.Circuit()
    for moment, t_ns in zip(ideal.moments, layers_ns):
        noisy.append(moment)
        if any(op.gate == cirq.CZ for op in moment.operations):
            noisy.append(cirq.CZPowGate(exponent=0.02 / math.pi).on(A, C))
        noisy.append(cirq.CZPowGate(exponent=2 * math.pi * zeta_per_ns * t_ns / math.pi).on(A, B))
    order = [A, B, C]
    u0 = ideal.unitary(qubit_order=order)
    u1 = noisy.unitary(qubit_order=order)
    expected = 1 - abs(np.trace(u0.conj().T @ u1)) ** 2 / 64
    result = analyze(_circuit(), MODEL, engine="exact")
    assert abs(result.actual_infidelity - expected) < 1e-9
    assert {"zz q(0, 0),q(1, 0)", "cz [beside x]"} <= {f.name for f in result.families}


def test_terminal_keeps_brackets_of_context_families(tmp_path):
    model = tmp_path / "m.toml"
    model.write_text('[gates.x]\nduration_ns = 40.0\n\n[[context]]\nname = "busy"\ngate = "x"\nall_driven = true\n'
                     'overrotation = 0.01\n')
    circuit = tmp_path / "c.qasm"
    circuit.write_text('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[1] q;\nx q[0];\nx q[0];\n')
    res = runner.invoke(app, ["tolerances", str(circuit), "-e", str(model), "--target", "0.1", "--width", "120"])
    assert res.exit_code == 0, res.output
    assert "x [busy]" in res.output
    res = runner.invoke(app, ["analyze", str(circuit), "-e", str(model), "--width", "120"])
    assert "x [busy]" in res.output
    # an error message that names such a key keeps its brackets
    model.write_text(model.read_text() + '\n[calibration.drift_rad_per_hour]\n"x [idle].overrotation" = 0.01\n')
    res = runner.invoke(app, ["tolerances", str(circuit), "-e", str(model), "--target", "0.1"])
    assert res.exit_code == 2
    assert "x [idle].overrotation" in res.output and "did you mean 'x [busy].overrotation'" in res.output
